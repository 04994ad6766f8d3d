"""Where the demo designs that ship with the package live."""

from __future__ import annotations

import pathlib

#: The design `stageledger` opens when given no file.
DEFAULT_DEMO = "geophone_preamp.toml"

_HERE = pathlib.Path(__file__).resolve().parent


def demo_dir() -> pathlib.Path:
    """The folder holding the bundled demo designs.

    Installed, they are the package data folder ``tui/demos`` (mapped from
    saved_designs/ in pyproject.toml); in a source checkout that folder does
    not exist, so fall back to the top-level saved_designs/.
    """
    installed = _HERE / "demos"
    if (installed / DEFAULT_DEMO).is_file():
        return installed
    return _HERE.parent / "saved_designs"


def default_demo() -> pathlib.Path:
    return demo_dir() / DEFAULT_DEMO
