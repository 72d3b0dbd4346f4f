"""``python -m reagentplan`` is the same command as ``reagentplan``."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "reagentplan", *args], capture_output=True,
                          text=True, timeout=120, cwd=ROOT)


def test_python_dash_m_gives_version_and_help():
    from reagentplan import __version__

    r = _run("--version")
    assert r.returncode == 0 and r.stdout.strip() == f"reagentplan {__version__}"
    r = _run("--help")
    assert r.returncode == 0
    for command in ("demo", "template", "check", "balance", "forecast", "plan", "dashboard"):
        assert command in r.stdout


def test_python_dash_m_checks_a_workbook_with_the_same_exit_codes(minimal_path, tmp_path):
    r = _run("check", str(minimal_path))
    assert r.returncode == 0 and "sound" in r.stdout
    bad = tmp_path / "bad.xlsx"
    bad.write_text("not a workbook")
    r = _run("check", str(bad))
    assert r.returncode == 2 and "Traceback" not in r.stderr
