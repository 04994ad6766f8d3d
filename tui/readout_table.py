"""The readout's content as a Rich table: figures, and how a candidate or the
present design moved against a reference (the committed design or a pinned
baseline).  Pure rendering, so it is tested without the app.  Numbers take
the screen's minus sign, as the Ledger and the pictures beside it do."""

from __future__ import annotations

import math

from rich.text import Text

from model.analyses.figures import FOLLOWER_KEYS, Figures
from model.analyses.midband import decibels
from model.design.units import format_si

from .consequences import moved, relative_change
from .minus_sign import minus_signs
from .number_text import db_text, gain_text
from .report import noise_shares, part_name
from .wrapping import whole, wrap

#: (group heading, rows of (label, figure key, unit kind)).
ROWS = (
    ("operating point", (("IC", "ic", "A"), ("VCE", "vce", "V"), ("region", "region", None))),
    ("small signal", (("gm", "gm", "S"), ("rπ", "r_pi", "Ω"), ("ro", "ro", "Ω"))),
    ("gain", (("av_loaded", "av_loaded", "gain"), ("av_source", "av_source", "gain"))),
    ("resistance", (("rin", "rin", "Ω"), ("rout", "rout", "Ω"))),
    ("response", (("f_low", "f_low", "Hz"), ("f_high", "f_high", "Hz"),
                  ("|av| at freq", "gain_at_freq", "V/V"))),
    ("headroom", (("wanted", "vout_wanted", "V"), ("swing_up", "swing_up", "V"),
                  ("swing_down", "swing_down", "V"))),
    ("distortion", (("thd", "thd", "%"),)),
    ("dissipation", (("p_transistor", "p_transistor", "W"), ("p_supply", "p_supply", "W"),
                     ("tj", "tj", "°C"))),
)
#: The noise, last: below the spread's yield, which a design with specs
#: must see without scrolling.
NOISE_ROWS = ("noise", (("en_total/√Hz", "en_total", "V/√Hz"), ("NF", "nf_db", "dB"), ("SNR", "snr_db", "dB")))
#: The follower (q2) of a two-transistor stage, in its own group just above
#: tj_max, which bounds its tj as it does the gain stage's.
FOLLOWER_ROWS = ("follower q2", (("q2 region", "region2", None), ("q2 IC", "ic2", "A"), ("q2 VCE", "vce2", "V"),
                                 ("q2 p", "p_transistor2", "W"), ("q2 tj", "tj2", "°C")))
#: The noise rows' keys: NaN there is a figure that does not exist once the
#: sweep has reported.
NOISE_KEYS = ("en_total", "nf_db", "snr_db")
#: A cell for a stage that has no such figure (a one-transistor stage beside a two).
ABSENT = "–"


def show(value, kind, compact: bool = False) -> str:
    """A figure as the readout shows it; ``compact`` drops a gain's dB (the
    change column then gives the move in dB)."""
    if kind is None:
        return str(value)
    if isinstance(value, float) and math.isnan(value):
        return "…"  # the large-signal sweep has not reported yet
    if kind == "gain":
        return gain_text(value) if compact else f"{gain_text(value)} ({db_text(float(decibels(value)))} dB)"
    if kind == "%":
        return f"{100 * value:.3g} %"
    if kind == "dB":
        return f"{value:.2f} dB"
    if kind == "V/√Hz":  # the label carries the /√Hz, so the value fits its column
        return "unbounded" if math.isinf(value) else format_si(value, "V")
    if kind == "°C":
        return f"{value:.1f} °C"
    if math.isinf(value):
        # In words, as the report writes it: no upper corner, or a resistance with no path.
        return "none" if kind == "Hz" else "unbounded"
    if kind == "V/V":  # four figures with their zeros, as gain_text writes a gain
        return format(value, "#.4g").removesuffix(".")
    return format_si(value, kind)


def _cell(fig: Figures, key: str, value, kind, compact: bool) -> str:
    """One value cell; a follower figure of a stage without a follower is ABSENT
    (its NaN would otherwise read as a sweep still running)."""
    if key in FOLLOWER_KEYS and not fig.two_transistors:
        return ABSENT
    if key in NOISE_KEYS and fig.noise is not None and isinstance(value, float) and math.isnan(value):
        return "none"  # computed, and does not exist (no NF at rs = 0, no SNR without a band)
    return show(value, kind, compact)


def _arrow(key, before, after) -> str:
    if not all(isinstance(v, (int, float)) for v in (before, after)) or not moved(key, before, after):
        return ""
    if any(math.isnan(v) for v in (before, after)):
        return ""
    if key in ("av_loaded", "av_source"):
        before, after = abs(before), abs(after)
    return "↑" if after > before else "↓"


#: Column widths of the readout (characters); it is laid out as plain text
#: because a table widget's measuring on every keystroke costs more than the
#: analysis behind it.
_LABEL, _VALUE, _CHANGE = 15, 10, 12


#: A yield the worker has not reported yet.
PENDING = "…"


def readout_table(shown: Figures, reference: Figures | None, *, shown_label: str, reference_label: str,
                  tj_max: float, reference_tj_max: float | None = None, yields: tuple | None = None) -> Text:
    """Figures of ``shown``; with a ``reference``, its values and the change beside them.
    ``tj_max`` (°C) is the shown design's limit, ``reference_tj_max`` the
    reference's (the candidate may be the one that moves it).
    ``yields`` (reference, shown), each a Yield, PENDING or None (no specs),
    adds the spread rows: the yield and the shown design's 95 % interval."""
    compare = reference is not None
    value_width = _VALUE if compare else _VALUE + 8
    head = f"{'figure':<{_LABEL}}"
    if compare:
        head += _right(reference_label, _VALUE)
    head += _right(shown_label, value_width)
    if compare:
        head += _right("change", _CHANGE)
    out = Text(head + "\n", style="bold")
    groups = ROWS
    if shown.two_transistors or (compare and reference.two_transistors):
        groups += (FOLLOWER_ROWS,)
    def group(heading, rows):
        out.append(heading + "\n", style="italic")
        for label, key, kind in rows:
            a = getattr(shown, key)
            line = f"  {label:<{_LABEL - 2}}"
            if compare:
                b = getattr(reference, key)
                line += _right(_cell(reference, key, b, kind, compact=True), _VALUE)
            line += _right(_cell(shown, key, a, kind, compact=compare), value_width)
            if compare:
                absent = key in FOLLOWER_KEYS and not (shown.two_transistors and reference.two_transistors)
                moved = "" if absent or _nan(a) or _nan(b) else relative_change(b, a, key)
                line += _right((moved + " " + _arrow(key, b, a)).strip(), _CHANGE)
            out.append(minus_signs(line) + "\n")

    for heading, rows in groups:
        group(heading, rows)
        if heading == "response" and shown.response is not None:
            out.append(f"  {_set_by(shown.response)}\n")
        if heading == "headroom" and shown.two_transistors and any(shown.swing_limits):
            # Which transistor ends each way of the swing, the question a
            # second transistor raises.
            ends = [f"{way}: {why}" for way, why in zip(("up", "down"), shown.swing_limits) if why]
            out.append(f"  {' · '.join(ends)}\n")
    out.append(minus_signs(_tj_max_row(tj_max, reference_tj_max if compare else None, compare, value_width)))
    if yields is not None:
        out.append("\nspread\n", style="italic")
        out.append(minus_signs(_yield_rows(yields, compare, value_width)))
    out.append("\n")
    group(*NOISE_ROWS)
    out.append(_largest_sources(shown, _LABEL + value_width + (_VALUE + _CHANGE if compare else 0)))
    return out


def _largest_sources(fig: Figures, width: int) -> str:
    """The shown design's three largest noise sources, wrapped between them
    to the table's ``width``: what to change to lower the noise.  "…" until
    the sweep reports, so the readout keeps its height."""
    text = ", ".join(map(whole, noise_shares(fig, 3))) or (PENDING if fig.noise is None else "none")
    return "\n".join(wrap(text, width, " " * 4, "  largest: ")) + "\n"


def _tj_max_row(shown: float, reference: float | None, compare: bool, value_width: int) -> str:
    """The limit the tj rows are read against, in each column that has a design."""
    line = f"  {'tj_max':<{_LABEL - 2}}"
    if compare:
        line += _right("" if reference is None else f"{reference:g} °C", _VALUE)
    line += _right(f"{shown:g} °C", value_width)
    if compare and reference is not None and reference != shown:
        line += _right(f"{shown - reference:+g} K " + _arrow("tj_max", reference, shown), _CHANGE)
    return line


def _yield_rows(yields: tuple, compare: bool, value_width: int) -> str:
    before, after = yields

    def cell(y):
        return "none" if y is None else y if isinstance(y, str) else f"{100 * y.value:.1f} %"

    line = f"  {'yield':<{_LABEL - 2}}" + (_right(cell(before), _VALUE) if compare else "")
    line += _right(cell(after), value_width)
    if compare and not isinstance(before, (str, type(None))) and not isinstance(after, (str, type(None))):
        moved = relative_change(before.value, after.value, "yield")
        line += _right((moved + " " + _arrow("yield", before.value, after.value)).strip(), _CHANGE)
    # The interval row is always there (… until known), so the readout keeps its height.
    interval = cell(after) if isinstance(after, (str, type(None))) else "{:.1f}–{:.1f} %".format(
        *(100 * e for e in after.interval))
    return line + f"\n  {'95 % interval':<{_LABEL - 2}}" + (" " * _VALUE if compare else "") + _right(interval, value_width)


def _set_by(r) -> str:
    """Which part sets each corner, e.g. "set by ce (1.80 Hz) · cl (212 kHz)"."""
    parts = [f"{part_name(p.part)} ({format_si(p.freq, 'Hz')})" for p in (r.low_by, r.high_by) if p is not None]
    return "set by " + " · ".join(parts) if parts else ""


def _right(text: str, width: int) -> str:
    """``text`` right-aligned in ``width``, always after at least one space: a
    value as wide as its column ("saturation") must not run into the one before."""
    return f"{' ' + text:>{width}}"


def _nan(v) -> bool:
    return isinstance(v, float) and math.isnan(v)


def warnings_text(fig: Figures) -> Text:
    """Active warnings as words (never colour alone)."""
    if not fig.warnings:
        return Text("warnings: none")
    return Text("warnings: " + "; ".join(f"{w.code}: {w.message}" for w in fig.warnings))
