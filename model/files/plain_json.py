"""The one way stageledger writes JSON: strict, with no NaN or Infinity.

JSON has no infinity and no NaN, and Python's ``json`` writes both unless told
not to, as tokens most other readers refuse.  A figure that is unbounded (an
open load's rout) or undefined (the corners of a stage with no passband) is
written as ``null`` instead; ``allow_nan=False`` then makes any value that
slipped past :func:`plain` fail loudly rather than produce invalid JSON.
"""

from __future__ import annotations

import json
import math
import numbers


def plain(value):
    """``value`` with every non-finite number, at any depth, replaced by None.

    Dicts, lists and tuples are walked (tuples become lists, as JSON has only
    arrays); numpy scalars become Python numbers so ``json`` can write them.
    """
    if isinstance(value, dict):
        return {k: plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, numbers.Integral):
        return int(value)
    if isinstance(value, numbers.Real):
        number = float(value)
        return number if math.isfinite(number) else None
    return value


def dumps(value, *, indent: int | None = 2) -> str:
    """``value`` as strict JSON text (non-finite numbers as null)."""
    # ensure_ascii (the default) stays: it also writes C1 controls and DEL as
    # \u escapes, so JSON sent to a terminal cannot carry a control sequence.
    return json.dumps(plain(value), indent=indent, allow_nan=False)
