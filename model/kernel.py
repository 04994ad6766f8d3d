"""The DC Newton loop of :mod:`model.solve` compiled with numba, row by row.

Optional: numba is imported (by :mod:`model.newton_jit`), and the loop
compiled or read from numba's cache, only when :func:`load` is called;
nothing uses it unless that succeeded.  The numpy loop in :mod:`model.solve` stays the reference; both
take the same steps (the same device equations, junction limiting and
convergence test), so they agree to rounding.
"""

from __future__ import annotations

import threading

_lock = threading.Lock()
_kernel = None
_failed = False


def ready():
    """The compiled kernel if it has been loaded, else None; never waits."""
    return _kernel


def load():
    """Import numba and compile (or load from cache) the kernel; returns it,
    or None where numba cannot be imported or compile."""
    global _kernel, _failed
    with _lock:
        if _kernel is None and not _failed:
            try:
                _kernel = _build()
            except Exception:  # numba absent, or an unsupported platform
                _failed = True
    return _kernel


def load_in_background() -> threading.Thread:
    """Start :func:`load` in a daemon thread, so a caller never waits for it."""
    t = threading.Thread(target=load, name="stageledger-kernel", daemon=True)
    t.start()
    return t


def _build():
    from . import newton_jit

    newton_jit.warm_up()
    return newton_jit.newton_rows
