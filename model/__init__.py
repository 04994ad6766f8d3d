"""stageledger's engine: pure computation on frozen dataclasses and numpy.

Nothing here may import textual, rich or the ``tui`` package; a test enforces it.
"""
