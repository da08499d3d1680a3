"""Shared fixtures: the real open data set beside the project, and tmp helpers."""

from __future__ import annotations

import pathlib

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]
SHARED_DATA = ROOT.parent / "shared" / "data"
REAL_DAY = SHARED_DATA / "real-2021-001"
TEST_DATA = ROOT / "tests" / "data"


@pytest.fixture(scope="session")
def shared_data() -> pathlib.Path:
    """Folder of the real 2021-001 data set (IGS/UNAVCO); skips when absent."""
    if not REAL_DAY.is_dir():
        pytest.skip(f"real open data not present at {REAL_DAY} (../shared/data beside the project)")
    return REAL_DAY


@pytest.fixture(scope="session")
def shared_set():
    """``shared_set("real-2011-283")``: that folder of ../shared/data; skips when absent."""
    def get(name: str) -> pathlib.Path:
        folder = SHARED_DATA / name
        if not folder.is_dir():
            pytest.skip(f"real open data not present at {folder} (../shared/data beside the project)")
        return folder
    return get


@pytest.fixture(scope="session")
def test_data() -> pathlib.Path:
    return TEST_DATA
