"""Writing files safely: a folder of outputs is staged in a temporary folder beside the
output folder and renamed into place only when everything has been written, and a single
file is written to a temporary name beside it and renamed, so a crash or a bad input
never leaves a half-written result and never destroys the last one.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import tempfile
from collections.abc import Iterator
from pathlib import Path

import pandas as pd


@contextlib.contextmanager
def staged_output(out_dir: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary folder; on success move its files into ``out_dir``.

    Files of ``out_dir`` that the run did not write are left as they were.  On an
    exception the temporary folder is removed and ``out_dir`` is untouched.
    """
    out = Path(out_dir)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".tmp", dir=out.parent))
    try:
        yield tmp
        _move_into(tmp, out)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def _move_into(src: Path, out: Path) -> None:
    """Move every file of ``src`` into ``out``, file by file; a sub-folder (a fleet's
    station folder) is merged into the one already there."""
    out.mkdir(exist_ok=True)
    for item in sorted(src.iterdir()):
        if item.is_dir() and (out / item.name).is_dir():
            _move_into(item, out / item.name)
        else:
            os.replace(item, out / item.name)


def write_csv(frame: pd.DataFrame, path: Path, float_format: str = "%.10g") -> Path:
    """Write a frame as CSV with ISO dates and no index."""
    frame.to_csv(path, index=False, float_format=float_format, date_format="%Y-%m-%d")
    return path


def write_json(data, path: Path) -> Path:
    """Write ``data`` as indented JSON (via a temporary name beside ``path``)."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_text(json.dumps(data, indent=2, default=str), encoding="utf-8")
    os.replace(tmp, path)
    return path


def write_bytes(data: bytes, path: str | os.PathLike) -> Path:
    """Write ``data`` to ``path`` through a unique temporary name beside it (two writers
    at once never share one), so a reader sees the old file or the whole new one."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
        os.replace(tmp, path)
    finally:
        Path(tmp).unlink(missing_ok=True)
    return path


def save_workbook(wb, path: str | os.PathLike) -> Path:
    """Save an openpyxl workbook to ``path`` through a temporary name beside it, so an
    existing file is replaced only by a complete one."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp")
    try:
        wb.save(tmp)
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)
    return path
