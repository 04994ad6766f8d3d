"""Where the demo designs that ship with the package live."""

from __future__ import annotations

import importlib.resources
import pathlib

#: The design `stageledger` opens when given no file.
DEFAULT_DEMO = "geophone_preamp.toml"

_HERE = pathlib.Path(__file__).resolve().parent


def demo_dir() -> pathlib.Path:
    """The folder holding the bundled demo designs.

    pyproject.toml ships saved_designs/ as the package ``tui.demos``, and the
    three ways of running find it differently:

    * a regular install has the folder ``tui/demos`` beside this module;
    * a source tree (and an editable install, which runs a source tree) has
      saved_designs/ beside the ``tui`` package, and that copy is looked at
      before the import system is asked, so a checkout run with
      ``python -m tui`` shows its own demos even when another checkout is
      installed editable (whose finder would map ``tui.demos`` to that one);
    * otherwise the import system is asked for ``tui.demos``, which also
      covers an editable install whose finder maps the package elsewhere.
    """
    for folder in (_HERE / "demos", _HERE.parent / "saved_designs"):
        if (folder / DEFAULT_DEMO).is_file():
            return folder
    try:
        demo = importlib.resources.files("tui.demos") / DEFAULT_DEMO
    except ImportError:  # setuptools' editable finder cannot import a folder without __init__.py
        demo = None
    if demo is not None and demo.is_file():
        return pathlib.Path(str(demo)).parent
    # Nothing found: name the place a source tree keeps them, so the error
    # that follows (opening the demo) points at a real, missing path.
    return _HERE.parent / "saved_designs"


def default_demo() -> pathlib.Path:
    return demo_dir() / DEFAULT_DEMO
