"""stageledger's engine: pure computation on frozen dataclasses and numpy.

Nothing here may import textual, rich or the ``tui`` package; a test enforces it.

The two calls most callers need::

    design = model.read_design("geophone_preamp.toml")
    figures = model.analyse(design)          # figures.to_dict() is `report --json`
"""

from .analysis import Figures, analyse
from .design import Design
from .designfile import read_design

__all__ = ["Design", "Figures", "analyse", "read_design"]
