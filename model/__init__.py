"""stageledger's engine: pure computation on frozen dataclasses and numpy.

Nothing here may import textual, rich or the ``tui`` package; a test enforces it.

The two calls most callers need::

    design = model.read_design("geophone_preamp.toml")
    figures = model.analyse(design)          # figures.to_dict() is `report --json`

They are loaded on first use, so that a command that only reads a file
(``history``) does not pay for importing the engine.
"""

import importlib

_HOMES = {"Design": "model.design.stage", "Figures": "model.analyses.figures",
          "analyse": "model.analyses.figures", "read_design": "model.files.designfile"}
__all__ = list(_HOMES)


def __getattr__(name: str):
    if name not in _HOMES:
        raise AttributeError(f"module 'model' has no attribute {name!r}")
    return getattr(importlib.import_module(_HOMES[name]), name)
