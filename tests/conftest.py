"""Fixtures shared by the workbench tests."""

import pathlib
import shutil

import pytest

DEMOS = pathlib.Path(__file__).resolve().parent.parent / "saved_designs"


@pytest.fixture
def preamp(tmp_path) -> pathlib.Path:
    """A private copy of the common-emitter demo (no history yet)."""
    path = tmp_path / "preamp.toml"
    shutil.copyfile(DEMOS / "geophone_preamp.toml", path)
    return path
