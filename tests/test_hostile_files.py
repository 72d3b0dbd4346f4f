"""Hostile and damaged files: an entity bomb, a zip bomb, a truncated or corrupted file,
a sheet claiming or holding far too many rows or columns, and a formula never
calculated.  Each ends in a `ScenarioError` (exit code 2 on the command line) that says
what is wrong in a coordinator's words, quickly, and with no traceback."""

from __future__ import annotations

import io
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import pytest
from openpyxl import load_workbook

from helpers import build_workbook, minimal_sheets, set_value, workbook_bytes
from reagentplan import workbook as wbmod
from reagentplan.errors import ScenarioError
from reagentplan.scenario import load_scenario

ROOT = Path(__file__).resolve().parents[1]

#: Ten levels of ten: about 1 GB of text once expanded (the "billion laughs" attack).
BILLION_LAUGHS = (b'<?xml version="1.0"?>\n<!DOCTYPE lolz [\n<!ENTITY lol "lol">\n'
                  + b"".join(b'<!ENTITY lol%d "%s">\n' % (k, (b"&lol%d;" % (k - 1) if k > 1 else b"&lol;") * 10)
                             for k in range(1, 10))
                  + b"]>\n")


def rewrite(raw: bytes, members: dict) -> bytes:
    """A copy of the zip ``raw`` with some members' bytes changed by ``members[name](old)``
    (or added, for a name it does not have)."""
    src = zipfile.ZipFile(io.BytesIO(raw))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            data = src.read(info.filename)
            if info.filename in members:
                data = members[info.filename](data)
            dst.writestr(info.filename, data)
        for name, make in members.items():
            if name not in src.namelist():
                dst.writestr(name, make(b""))
    return out.getvalue()


def member_of_sheet(raw: bytes, title: str) -> str:
    wb = load_workbook(io.BytesIO(raw), read_only=True)
    index = wb.sheetnames.index(title) + 1
    wb.close()
    return f"xl/worksheets/sheet{index}.xml"


def refused(raw: bytes, *parts: str) -> str:
    t0 = time.perf_counter()
    with pytest.raises(ScenarioError) as info:
        load_scenario(raw)
    seconds = time.perf_counter() - t0
    text = info.value.report()
    for p in parts:
        assert p in text, text
    assert seconds < 30, f"refusing took {seconds:.1f} s"  # a bound on a hang, not a speed target
    return text


def cli(path: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "reagentplan", "check", str(path)],
                          capture_output=True, text=True, timeout=120, cwd=ROOT)


@pytest.fixture(scope="module")
def good() -> bytes:
    return workbook_bytes(minimal_sheets())


# --------------------------------------------------------------------------- entity bomb


def _bomb_sheet(xml: bytes) -> bytes:
    body = xml.split(b"?>", 1)[-1] if xml.startswith(b"<?xml") else xml
    return BILLION_LAUGHS + body.replace(b"<t>Test Station</t>", b"<t>&lol9;</t>")


def test_entity_bomb_in_a_sheet_is_refused_unexpanded(good, tmp_path):
    raw = rewrite(good, {member_of_sheet(good, "plant"): _bomb_sheet})
    text = refused(raw, wbmod.UNREADABLE, "XML entities")
    assert "lol" not in text
    path = tmp_path / "bomb.xlsx"
    path.write_bytes(raw)
    r = cli(path)
    assert r.returncode == 2, r.stderr
    assert wbmod.UNREADABLE in r.stderr and "Traceback" not in r.stderr


def test_entity_declared_in_the_workbook_part_is_refused(good):
    def declare(xml: bytes) -> bytes:
        return (b'<?xml version="1.0"?>\n<!DOCTYPE workbook [<!ENTITY x "y">]>\n'
                + (xml.split(b"?>", 1)[-1] if xml.startswith(b"<?xml") else xml))

    refused(rewrite(good, {"xl/workbook.xml": declare}), wbmod.UNREADABLE, "XML entities")


def test_reading_requires_defusedxml():
    import openpyxl

    assert openpyxl.DEFUSEDXML, "openpyxl must parse through defusedxml"


# --------------------------------------------------------------------------- zip bomb


def test_zip_bomb_is_refused_before_it_is_unpacked(good, tmp_path):
    """210 MB of spaces in a member: 0.2 MB on disk, over the 200 MB unpacked limit."""
    src = zipfile.ZipFile(io.BytesIO(good))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as dst:
        for info in src.infolist():
            dst.writestr(info.filename, src.read(info.filename))
        with dst.open("xl/media/padding.bin", "w", force_zip64=True) as fh:
            chunk = b" " * 2**20
            for _ in range(210):
                fh.write(chunk)
    raw = out.getvalue()
    assert len(raw) < 2**20
    text = refused(raw, wbmod.UNREADABLE, "would unpack to 210 MB", "at most 200 MB")
    path = tmp_path / "zipbomb.xlsx"
    path.write_bytes(raw)
    r = cli(path)
    assert r.returncode == 2 and "would unpack to" in r.stderr and "Traceback" not in r.stderr
    assert text


# --------------------------------------------------------------------------- damaged files


@pytest.mark.parametrize("keep", [0.5, 0.9, 0.99])
def test_truncated_file(good, tmp_path, keep):
    raw = good[: int(len(good) * keep)]
    refused(raw, wbmod.UNREADABLE, "damaged or cut short")
    path = tmp_path / "cut.xlsx"
    path.write_bytes(raw)
    r = cli(path)
    assert r.returncode == 2 and "cut short" in r.stderr and "Traceback" not in r.stderr


def test_corrupted_member_is_reported_as_damaged(good):
    """Bytes flipped inside a compressed sheet: the zip's directory is intact, the CRC is not."""
    name = member_of_sheet(good, "generation")
    zf = zipfile.ZipFile(io.BytesIO(good))
    info = zf.getinfo(name)
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)
    bad = bytearray(good)
    for k in range(start + 20, start + 60):
        bad[k] ^= 0x55
    refused(bytes(bad), wbmod.UNREADABLE, "damaged")


def test_an_xls_or_password_protected_workbook_is_named_as_such():
    ole2 = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 600
    text = refused(ole2, wbmod.UNREADABLE, "old-style .xls workbook or a password-protected one")
    assert "remove the password" in text


def test_a_zip_that_is_not_a_workbook(tmp_path):
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w") as z:
        z.writestr("photo.jpg", b"\xff\xd8\xff")
    refused(out.getvalue(), wbmod.UNREADABLE, "not a workbook")


# --------------------------------------------------------------------------- sizes of sheets


def test_a_sheet_claiming_a_million_rows_is_read_by_what_it_holds(good):
    """The ``dimension`` tag says A1:XFD1048576; the loader ignores the claim."""
    def claim(xml: bytes) -> bytes:
        import re

        return re.sub(rb'<dimension ref="[^"]*"', b'<dimension ref="A1:XFD1048576"', xml)

    raw = rewrite(good, {member_of_sheet(good, "generation"): claim})
    t0 = time.perf_counter()
    scn = load_scenario(raw)
    assert len(scn.generation) == 10
    assert time.perf_counter() - t0 < 30


def test_rows_beyond_the_cap_are_refused(tmp_path):
    wb = build_workbook(minimal_sheets())
    wb["generation"].cell(wbmod.MAX_ROWS + 5, 1, "x")
    buf = io.BytesIO()
    wb.save(buf)
    text = refused(buf.getvalue(), "sheet 'generation'", "more than 200,000 rows")
    assert "delete the unused rows" in text


def test_columns_beyond_the_cap_are_refused():
    wb = build_workbook(minimal_sheets())
    wb["units"].cell(2, wbmod.MAX_COLUMNS + 1, 5)
    buf = io.BytesIO()
    wb.save(buf)
    refused(buf.getvalue(), "sheet 'units'", f"more than {wbmod.MAX_COLUMNS} columns")


def test_a_value_in_a_column_without_header_is_still_found():
    """Rows are no longer padded to the sheet's claimed width: a value right of the
    header is still reported."""
    s = minimal_sheets()
    s["units"][1].append(None)
    s["units"][1].append(42)
    refused(workbook_bytes(s), "sheet 'units'", "a column with values but no header")


# --------------------------------------------------------------------------- formulas


def test_uncalculated_formula_where_a_number_is_needed():
    """openpyxl writes formulas without results, like any program that does not calculate."""
    s = minimal_sheets()
    set_value(s, "units", 0, "capacity_mw", "=100*2")
    set_value(s, "scrubber", "removal_pct", None, "=90+7")  # optional: must not fall to the default
    text = refused(workbook_bytes(s), "sheet 'units', row 2, column 'capacity_mw'",
                   "found the formula '=100*2' with no calculated value",
                   "open it in Excel or LibreOffice and save it again")
    assert "sheet 'scrubber', row 2, column 'value (removal_pct)': found the formula '=90+7'" in text


def test_calculated_formula_takes_its_stored_value():
    s = minimal_sheets()
    set_value(s, "units", 0, "capacity_mw", "=100*2")
    raw = workbook_bytes(s)
    raw = rewrite(raw, {member_of_sheet(raw, "units"):
                        lambda xml: xml.replace(b"<f>100*2</f><v />", b"<f>100*2</f><v>200</v>")})
    scn = load_scenario(raw)
    assert scn.units[0].capacity_mw == 200
