"""Where the demo designs that ship with the package live."""

from __future__ import annotations

import pathlib
from importlib import resources

#: The design `stageledger` opens when given no file.
DEFAULT_DEMO = "geophone_preamp.toml"


def demo_dir() -> pathlib.Path:
    """The folder holding the bundled demo designs.

    Installed, they are package data of ``tui.demos``; in a source checkout
    that package is only a mapping in pyproject.toml, so fall back to the
    top-level saved_designs/ beside this package.
    """
    try:
        folder = pathlib.Path(str(resources.files("tui.demos")))
        if (folder / DEFAULT_DEMO).is_file():
            return folder
    except ModuleNotFoundError:
        pass
    return pathlib.Path(__file__).resolve().parent.parent / "saved_designs"


def default_demo() -> pathlib.Path:
    return demo_dir() / DEFAULT_DEMO
