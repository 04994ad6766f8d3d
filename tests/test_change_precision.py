"""A change is shown to the resolution of the figure it belongs to (issue 15):
a move below the figure's last shown place reads as 0, with no arrow, and the
change column keeps a gap from the value before it.

The expected numbers are arithmetic on the inputs (per cent = 100·Δ/before,
dB = 20·log10 of the ratio), worked by hand in the comments.
"""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from model import analyse
from model.design.stage import default_design, with_values
from tui import consequences
from tui.consequences import moved, relative_change
from tui.readout_table import readout_table


@pytest.mark.parametrize("key, before, after, shown", [
    # tj is shown to 0.1 °C: a change of 0.000706 K is below it.
    ("tj", 26.1, 26.1 - 0.000706, "0 K"),
    ("tj", 25.5, 26.5, "+1.0 K"),
    ("tj", 25.52, 25.68, "+0.2 K"),  # 0.16 K to the 0.1 K tj is shown to
    # rin 7.64 kΩ (three figures: a step of 10 Ω is 0.13 %): +0.0489 % is noise.
    ("rin", 7640.0, 7640.0 * 1.000489, "0 %"),
    ("rin", 7640.0, 7660.0, "+0.3 %"),  # 20/7640 = 0.262 %, to 0.1 %
    ("ic", 575e-6, 530e-6, "-7.8 %"),  # -45/575 = -7.83 %
    ("ic", 575e-6, 1250e-6, "+117 %"),  # 675/575 = 117.4 %: three figures at most
    # A gain to four figures: -23.81 → -23.82 is 20·log10(23.82/23.81) = 0.0036 dB.
    ("av_source", -23.81, -23.82, "+0.004 dB"),
    ("av_source", -23.81, -23.81 * (1 + 1e-7), "0 dB"),
    ("av_source", -16.68, -23.76, "+3.07 dB"),  # 20·log10(23.76/16.68) = 3.073 dB
    ("nf_db", 2.59, 2.5905, "0 dB"),
    ("nf_db", 2.18, 2.59, "+0.41 dB"),
    ("yield", 0.953, 0.95301, "0 pts"),
    ("yield", 0.953, 0.871, "-8.2 pts"),
])
def test_a_change_is_shown_to_the_figures_own_resolution(key, before, after, shown):
    assert relative_change(before, after, key) == shown
    assert moved(key, before, after) == (shown.split()[0] != "0")


def _readout_warmer_by(kelvin: float) -> str:
    """The readout of the default design against itself with a warmer ambient."""
    before = default_design()
    after = with_values(before, {"environment.ambient": before.environment.ambient + kelvin})
    fb, fa = analyse(before, large_signal=False), analyse(after, large_signal=False)
    return readout_table(fa, fb, shown_label="candidate", reference_label="committed",
                         tj_max=before.transistor.tj_max).plain


def _rows(text: str) -> dict:
    return {line.split()[0]: line for line in text.splitlines() if line.startswith("  ")}


def test_the_readout_gives_noise_no_arrow_and_keeps_a_gap():
    """An ambient 0.001 K warmer moves tj by about 0.001 K: shown as 0, no arrow."""
    rows = _rows(_readout_warmer_by(0.001))
    assert rows["tj"].rstrip().endswith(" 0 K"), rows["tj"]
    assert "↑" not in rows["tj"] and "↓" not in rows["tj"]
    for line in rows.values():
        # Between every two cells at least one space: "26.1 °C" never runs into "-0.000706 K".
        assert not any(f"{unit}{sign}" in line for unit in ("°C", "Ω") for sign in "+-\u2212"), line


def test_a_change_that_shows_gets_its_arrow():
    assert _rows(_readout_warmer_by(10))["tj"].rstrip().endswith("K ↑")


_KEYS = st.sampled_from(["av_source", "rin", "tj", "yield", "nf_db", "f_high", "thd"])
#: Numbers equal to others of them: 0 == 0.0 == -0.0, 1 == 1.0, -2 == -2.0.
_NUMBERS = (0, 0.0, -0.0, 1, 1.0, -2, -2.0, 2.5, 1e-9)


@settings(max_examples=300, deadline=None)
@given(key=_KEYS, before=st.sampled_from(_NUMBERS), after=st.sampled_from(_NUMBERS))
def test_a_remembered_change_is_the_one_worked_out_afresh(key, before, after):
    """Changes are remembered by value: one remembered for an equal pair
    (another type, the other zero) is the one worked out for this pair."""
    afresh = consequences._finite_change.__wrapped__(before, after, key, consequences._KINDS.get(key))
    for twin_b in (v for v in _NUMBERS if v == before):
        for twin_a in (v for v in _NUMBERS if v == after):
            consequences._finite_change.cache_clear()
            relative_change(twin_b, twin_a, key)
            assert relative_change(before, after, key) == afresh, (twin_b, twin_a)
