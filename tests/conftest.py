from __future__ import annotations

import pytest

from helpers import minimal_sheets, write_workbook


@pytest.fixture
def sheets():
    return minimal_sheets()


@pytest.fixture
def minimal_path(tmp_path):
    return write_workbook(minimal_sheets(), tmp_path / "minimal.xlsx")


@pytest.fixture(scope="session")
def demo_path(tmp_path_factory):
    from demo.build_demo import build_demo_workbook

    return build_demo_workbook(tmp_path_factory.mktemp("demo") / "demo_station.xlsx")
