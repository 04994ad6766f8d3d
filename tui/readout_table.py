"""The readout's content as a Rich table: figures, and how a candidate or the
present design moved against a reference (the committed design or a pinned
baseline).  Pure rendering, so it is tested without the app."""

from __future__ import annotations

import math

from rich.table import Table
from rich.text import Text

from model.analysis import Figures
from model.midband import decibels
from model.units import format_si

from .consequences import relative_change

#: (group heading, rows of (label, figure key, unit kind)).
ROWS = (
    ("operating point", (("IC", "ic", "A"), ("VCE", "vce", "V"), ("region", "region", None))),
    ("small signal", (("gm", "gm", "S"), ("rπ", "r_pi", "Ω"), ("ro", "ro", "Ω"))),
    ("gain", (("av_loaded", "av_loaded", "gain"), ("av_source", "av_source", "gain"))),
    ("resistance", (("rin", "rin", "Ω"), ("rout", "rout", "Ω"))),
    ("headroom", (("wanted", "vout_wanted", "V"), ("swing_up", "swing_up", "V"),
                  ("swing_down", "swing_down", "V"))),
    ("distortion", (("thd", "thd", "%"),)),
    ("dissipation", (("p_transistor", "p_transistor", "W"), ("p_supply", "p_supply", "W"),
                     ("tj", "tj", "°C"))),
)


def show(value, kind, compact: bool = False) -> str:
    """A figure as the readout shows it; ``compact`` drops a gain's dB (the
    change column then gives the move in dB)."""
    if kind is None:
        return str(value)
    if isinstance(value, float) and math.isnan(value):
        return "…"  # the large-signal sweep has not reported yet
    if kind == "gain":
        return f"{value:+.4g}" if compact else f"{value:+.4g} ({float(decibels(value)):+.1f} dB)"
    if kind == "%":
        return f"{100 * value:.3g} %"
    if kind == "°C":
        return f"{value:.1f} °C"
    if math.isinf(value):
        return f"∞ {kind}"
    return format_si(value, kind)


def _arrow(key, before, after) -> str:
    if not all(isinstance(v, (int, float)) for v in (before, after)) or before == after:
        return ""
    if any(math.isnan(v) for v in (before, after)):
        return ""
    if key in ("av_loaded", "av_source"):
        before, after = abs(before), abs(after)
    return "↑" if after > before else "↓"


def readout_table(shown: Figures, reference: Figures | None, *, shown_label: str, reference_label: str,
                  tj_max: float) -> Table:
    """Figures of ``shown``; with a ``reference``, its values and the change beside them."""
    table = Table(box=None, show_header=True, pad_edge=False, expand=False, header_style="bold")
    table.add_column("figure", no_wrap=True)
    if reference is not None:
        table.add_column(reference_label, justify="right", no_wrap=True)
    table.add_column(shown_label, justify="right", no_wrap=True)
    if reference is not None:
        table.add_column("change", justify="right", no_wrap=True)
    for heading, rows in ROWS:
        table.add_row(Text(heading, style="italic"))
        for label, key, kind in rows:
            a = getattr(shown, key)
            cells = [Text("  " + label)]
            if reference is not None:
                b = getattr(reference, key)
                cells.append(Text(show(b, kind, compact=True)))
            cells.append(Text(show(a, kind, compact=reference is not None)))
            if reference is not None:
                moved = "" if _nan(a) or _nan(b) else relative_change(b, a, key)
                cells.append(Text(f"{moved} {_arrow(key, b, a)}".strip()))
            table.add_row(*cells)
    table.add_row(Text("  tj_max"), *([Text("")] if reference is not None else []),
                  Text(f"{tj_max:g} °C"), *([Text("")] if reference is not None else []))
    return table


def _nan(v) -> bool:
    return isinstance(v, float) and math.isnan(v)


def warnings_text(fig: Figures) -> Text:
    """Active warnings as words (never colour alone)."""
    if not fig.warnings:
        return Text("warnings: none")
    return Text("warnings: " + "; ".join(f"{w.code}: {w.message}" for w in fig.warnings))
