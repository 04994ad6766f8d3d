"""stageledger's engine: pure computation on frozen dataclasses and numpy.

Nothing here may import textual, rich or the ``tui`` package; a test enforces it.

The two calls most callers need::

    design = model.read_design("geophone_preamp.toml")
    figures = model.analyse(design)          # figures.to_dict() is `report --json`
"""

from model.analyses.figures import Figures, analyse
from model.design.stage import Design
from model.files.designfile import read_design

__all__ = ["Design", "Figures", "analyse", "read_design"]
