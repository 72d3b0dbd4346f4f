"""What an install holds: every package folder of the source tree, the dashboard and the
demo inside the reagentplan namespace, and never the tests."""

from __future__ import annotations

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _config() -> dict:
    return tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["tool"]["setuptools"]


def _installed_name(folder: Path, package_dir: dict[str, str]) -> str:
    rel = folder.relative_to(ROOT).as_posix()
    for name, src in package_dir.items():
        if rel == src or rel.startswith(src + "/"):
            return name + rel[len(src):].replace("/", ".")
    return rel.replace("/", ".")


def test_every_package_folder_is_listed_and_only_under_reagentplan():
    cfg = _config()
    listed = set(cfg["packages"])
    folders = [p.parent for top in ("reagentplan", "dashboard", "demo")
               for p in (ROOT / top).rglob("__init__.py")]
    found = {_installed_name(f, cfg["package-dir"]) for f in folders}
    assert found - listed == set(), "add these to [tool.setuptools] packages in pyproject.toml"
    assert listed - found == set(), "these listed packages have no folder"
    assert all(name == "reagentplan" or name.startswith("reagentplan.") for name in listed)
    assert not any(name.split(".")[0] in ("tests", "bench", "scripts") for name in listed)


def test_the_dashboard_and_the_demo_import_from_their_folders_under_the_namespace():
    """From the checkout (or an editable install) they are the top-level folders; from an
    install they sit inside the installed reagentplan package."""
    import reagentplan
    import reagentplan.dashboard.app
    import reagentplan.demo.build_demo

    installed = Path(reagentplan.__file__).resolve().parent
    for module, folder in ((reagentplan.dashboard.app, "dashboard"), (reagentplan.demo.build_demo, "demo")):
        assert Path(module.__file__).resolve().parent in (ROOT / folder, installed / folder)
