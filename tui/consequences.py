"""Plain-text tables of what a change did: figures before → after, and warnings."""

from __future__ import annotations

import functools
import math
import operator

from model.design.stage import FIELDS
from model.design.units import format_si
from model.files.ledger import HEADLINE, Entry

from .number_text import gain_text
from .safe_text import visible

#: How each headline figure is shown: (label, unit for format_si, or a special kind).
_SHOW = {
    "ic": ("IC", "A"), "vce": ("VCE", "V"), "region": ("region", None),
    "av_loaded": ("av_loaded", "gain"), "av_source": ("av_source", "gain"),
    "rin": ("rin", "Ω"), "rout": ("rout", "Ω"), "swing_up": ("swing_up", "V"),
    "swing_down": ("swing_down", "V"), "thd": ("thd", "%"), "p_transistor": ("p_transistor", "W"),
    "p_supply": ("p_supply", "W"), "tj": ("tj", "°C"), "f_low": ("f_low", "Hz"), "f_high": ("f_high", "Hz"),
    "nf_db": ("NF", "dB"), "snr_db": ("SNR", "dB"),
    "ic2": ("q2 IC", "A"), "vce2": ("q2 VCE", "V"), "p_transistor2": ("q2 p_transistor", "W"),
    "yield": ("yield", "%"),
}


def show_figure(key: str, value) -> str:
    unit = _SHOW[key][1]
    if unit is None:
        return str(value)
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return _not_finite(key, value)
    if unit == "gain":
        return f"{gain_text(value)} V/V"
    if unit == "%":
        return f"{100 * value:.3g} %"
    if unit == "°C":
        return f"{value:.1f} °C"
    if unit == "dB":
        return f"{value:.2f} dB"
    return format_si(value, unit)


def _not_finite(key: str, value) -> str:
    """A headline figure that is not a number, in words: an infinite corner
    does not exist (no f_high below 10 THz); any other infinite figure (an
    open-circuit resistance) is unbounded; NaN or null does not exist."""
    if value is None or math.isnan(value) or key in ("f_low", "f_high"):
        return "none"
    return "unbounded"


def show_value(key: str, value) -> str:
    """A design value with its unit, e.g. ``stage.rc`` 6800 → "6.80 kΩ"."""
    field = FIELDS.get(key)
    if isinstance(value, list):  # a tolerance or spec range, as set writes it
        return "..".join(show_value(key, v) if isinstance(v, str) else f"{v:g}" for v in value)
    if isinstance(value, str):
        return visible(value)  # a name or notes: text from the file, shown on a terminal
    if field is None or not field.unit or field.unit == "°C":
        return f"{value:g} {field.unit}" if isinstance(value, float) and field and field.unit else str(value)
    return format_si(value, field.unit)


#: Significant figures each kind of figure is shown to (show_figure, the
#: Readout): the resolution its change is shown to. dB figures and tj are
#: shown to fixed places instead (see _resolution).
_FIGURES = {"gain": 4, "gain_at_freq": 4}
#: Figures shown in °C to one decimal: their change is a difference, in K.
_TEMPERATURES = ("tj", "tj2")


#: The kind of each headline figure (its unit for format_si, or "gain").
_KINDS = {key: show[1] for key, show in _SHOW.items()}


def _resolution(key: str, before: float, kind: str | None) -> float:
    """The smallest step of ``before`` as it is shown, in the unit its change
    is shown in: dB for gains and dB figures, K for temperatures, points for
    the yield, else per cent of ``before`` (``kind``: the figure's, see _KINDS)."""
    if kind == "dB":
        return 0.01  # shown to two places
    if key in _TEMPERATURES:
        return 0.1  # shown to one decimal
    shown = 100.0 * before if key == "yield" else before
    figures = _FIGURES.get(kind or key, 3)
    step = 10.0 ** (math.floor(math.log10(abs(shown))) - (figures - 1))
    if key == "yield":
        return step
    if kind == "gain":  # a step of the last figure, as a ratio in dB (20·log10 e ≈ 8.69 dB per unit ratio)
        return 20.0 / math.log(10.0) * step / abs(before)
    return 100.0 * step / abs(before)


def _to_resolution(change: float, resolution: float, unit: str) -> str:
    """``change`` to the places its resolution supports (three significant
    figures at most, but dB to two places where the resolution has them), or
    a plain 0 when it is below it: a sign or an arrow on noise reads as a
    direction that is not there."""
    places = max(0, math.ceil(-math.log10(resolution)))
    if change:
        figures = max(0, 2 - math.floor(math.log10(abs(change))))
        places = min(places, max(figures, 2 if unit == "dB" else 0))
    text = format(change, f"+.{places}f")  # "-0.00" too is a plain 0
    return f"{'0' if float(text) == 0 else text} {unit}"


def relative_change(before, after, key: str = "") -> str:
    """The change from ``before`` to ``after``: in dB for gains (so a larger
    inverting gain reads as a gain, not a loss), a difference for dB figures,
    in K for temperatures, in points for the yield, else in per cent; always
    to the resolution ``before`` is shown to, so a move smaller than its last
    figure reads as 0."""
    if not (isinstance(before, (int, float)) and isinstance(after, (int, float))):
        return "" if before == after else "changed"
    if not (math.isfinite(before) and math.isfinite(after)):
        # "none → none" is no change at all, not a 0 % one; NaN ≠ NaN, so
        # compare what the table shows.
        same = key in _SHOW and show_figure(key, before) == show_figure(key, after)
        return "unchanged" if same or before == after else "—"
    return _finite_change(before, after, key, _KINDS.get(key))


@functools.lru_cache(maxsize=4096, typed=True)
def _finite_change(before: float, after: float, key: str, kind: str | None) -> str:
    """relative_change of two finite numbers (``kind``: the figure's, see
    _KINDS); remembered, since a history comes back to the same designs."""
    if kind == "gain" and before and after:
        return _to_resolution(20.0 * math.log10(abs(after) / abs(before)), _resolution(key, before, kind), "dB")
    if kind == "dB":  # already a ratio: its change is a difference
        return _to_resolution(after - before, _resolution(key, before, kind), "dB")
    if key in _TEMPERATURES:  # a per cent of a Celsius reading means nothing
        return _to_resolution(after - before, _resolution(key, before, kind), "K")
    if key == "yield":  # a change of a fraction, in percentage points
        return _to_resolution(100.0 * (after - before), _resolution(key, before, kind) if before else 0.1, "pts")
    if before == after:
        return "0 %"
    if before == 0:
        return "—"
    return _to_resolution(100.0 * (after - before) / abs(before), _resolution(key, before, kind), "%")


def moved(key: str, before, after) -> bool:
    """Whether the change from ``before`` to ``after`` shows at all (so earns
    an arrow): not when it is below the resolution of the figure."""
    return _shows(relative_change(before, after, key))


def _shows(change: str) -> bool:
    """Whether a relative_change text is a move, not 0 or no figure at all."""
    return change.split(" ")[0] not in ("", "0", "unchanged", "—")


def sign_change(before, after) -> str:
    """"inverting → non-inverting" (or back) when a gain changes sign; else ""."""
    if not all(isinstance(v, (int, float)) and math.isfinite(v) and v != 0 for v in (before, after)):
        return ""
    if (before < 0) == (after < 0):
        return ""
    word = {True: "inverting", False: "non-inverting"}
    return f"{word[before < 0]} → {word[after < 0]}"


def render_changes(changes) -> list:
    """``  stage.rc: 6.80 kΩ → 10.0 kΩ``, one line a change (a name or notes
    as long as its text: the terminal wraps it, as it would the text)."""
    return [f"  {c.key}: {show_value(c.key, c.old)} → {show_value(c.key, c.new)}" for c in changes]


def render_consequences(before: dict, after: dict, raised, cleared) -> list:
    rows = [f"  {'figure':<14}{'before':>16}{'after':>16}{'change':>12}"]
    for key in HEADLINE:
        if key not in after and key not in before:
            continue
        # A figure left out of a record did not exist for that design (a
        # corner with no passband): "none", so a vanished band is seen.
        b = show_figure(key, before[key]) if key in before else ("none" if before else "")
        a = show_figure(key, after[key]) if key in after else "none"
        change = relative_change(before[key], after[key], key) if key in before and key in after else ""
        rows.append(f"  {_SHOW[key][0]:<14}{b:>16}{a:>16}  {change:>10}")  # a gap before the change, always
        flip = sign_change(before.get(key), after.get(key)) if _SHOW[key][1] == "gain" else ""
        if flip:  # the dB column shows the size alone; a phase reversal needs words
            rows.append(f"  {'':<14}{flip:>44}")
    gone = [_SHOW[k][0] for k in HEADLINE if k in before and k not in after]
    if gone:  # a new topology without them, or a band that vanished
        rows.append(f"  no longer apply: {', '.join(gone)}")
    rows.append(f"  warnings raised: {', '.join(raised) or 'none'}")
    rows.append(f"  warnings cleared: {', '.join(cleared) or 'none'}")
    return rows


def render_entry(e: Entry) -> list:
    head = f"#{e.number}  {e.time:%Y-%m-%d %H:%M:%S}Z  {e.action}"
    if e.reverses is not None:
        head += f" of #{e.reverses}"
    if e.origin:
        head += f" from {visible(e.origin)}"
    rows = [head]
    if e.note:
        rows.append(f"  note: {visible(e.note)}")
    rows += render_changes(e.changes)
    rows += render_consequences(e.before, e.after, e.raised, e.cleared)
    return rows


#: Figures a ledger line may mention, with the short name used there.
_COMPACT = (("av_source", "gain"), ("yield", "yield"), ("rin", "rin"), ("rout", "rout"), ("swing_up", "swing↑"),
            ("swing_down", "swing↓"), ("thd", "thd"), ("p_supply", "p_supply"), ("tj", "tj"),
            ("ic", "ic"), ("vce", "vce"), ("f_low", "f_low"), ("f_high", "f_high"))
_COMPACT_KEYS = tuple(key for key, _ in _COMPACT)
_SIZE = operator.itemgetter(0)


def compact_parts(before: dict, after: dict, most: int = 3) -> list:
    """The biggest moves of a change in a few words each, e.g. ["gain +6.1 dB", "rin -48 %"].

    The gain comes first when it moved; the others are the largest relative
    changes. A move below a figure's resolution is left out.
    """
    parts, ranked = [], []
    # The figures fetched by map, not looked up one by one: a long history words ten thousand entries.
    for (key, short), b, a in zip(_COMPACT, map(before.get, _COMPACT_KEYS), map(after.get, _COMPACT_KEYS)):
        if (b is None) != (a is None):
            if before:
                parts.append(f"{short} {'none' if a is None else 'back'}")
            continue
        if not isinstance(b, (int, float)) or not isinstance(a, (int, float)):
            continue
        if key == "av_source":
            change = relative_change(b, a, key)
            if _shows(change):
                parts.append(f"{short} {change}")
        elif b and math.isfinite(b) and math.isfinite(a):
            ranked.append((abs((a - b) / b), key, short, b, a))
    # Largest first (a tie in the table's order), and worded only until the line has its few.
    ranked.sort(key=_SIZE, reverse=True)
    room = most - len(parts) + 1
    for _, key, short, b, a in ranked:
        if room <= 0:
            break
        change = _finite_change(b, a, key, _KINDS.get(key))
        if _shows(change):  # a move below the figure's resolution is no consequence
            parts.append(f"{short} {change}")
            room -= 1
    if before.get("region") != after.get("region") and "region" in after:
        parts.append(f"now {after['region']}")
    return parts or ["no change in the figures"]
