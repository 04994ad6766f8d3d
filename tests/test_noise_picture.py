"""The Noise picture draws the engine's own spectrum, lettered for a
terminal without colour."""

import numpy as np
from test_noise import _spectrum  # noqa: E402  (the engine's spectrum, computed independently of the picture)

from model import analyse, read_design
from model.design.stage import default_design, with_values
from tui.chart import render_stack
from tui.pictures import NOISE, PICTURES, charts_for


def test_the_noise_picture_draws_the_spectrum_with_its_letters():
    import pathlib

    d = read_design(pathlib.Path(__file__).resolve().parents[1] / "saved_designs" / "geophone_preamp.toml")
    fig = analyse(d)
    (chart,) = charts_for(NOISE, d, fig)
    assert chart.x.log and chart.y.log and chart.y.unit == "V/√Hz"
    total = chart.series[0]
    ns, _, _ = _spectrum(d, total.x)
    np.testing.assert_allclose(total.y, ns.total[0], rtol=1e-9)
    assert [s.mark for s in chart.series] == [None, "e", "i", "r"]
    text = render_stack((chart,), 78, 20)
    drawn = text if isinstance(text, str) else "\n".join(map(str, text))
    for words in ("e en", "i in·rs", "r rs alone", "B noise band 2.00 Hz – 200 Hz", "F signal"):
        assert words in drawn, words
    assert drawn.count("B noise band") == 1  # the band's two ends explained once
    assert NOISE in PICTURES


def test_without_source_resistance_the_floor_and_in_rs_are_left_out():
    d = with_values(default_design(), {"source.rs": 0.0})
    (chart,) = charts_for(NOISE, d, analyse(d))
    assert [s.mark for s in chart.series] == [None, "e"]


def test_the_readout_names_the_three_largest_noise_sources_in_order():
    """What to change to lower the noise: the engine's own ranking, never cut
    inside a name and its share, within the readout's width."""
    import pathlib

    from tui.readout_table import readout_table

    d = read_design(pathlib.Path(__file__).resolve().parents[1] / "saved_designs" / "geophone_preamp.toml")
    fig = analyse(d)
    text = readout_table(fig, None, shown_label="committed", reference_label="", tj_max=150.0).plain
    rows = text[text.index("  largest: "):].rstrip("\n").split("\n")
    assert all(len(r) <= 33 for r in rows), rows  # the one-column table's width
    joined = " ".join(r.strip() for r in rows).removeprefix("largest: ")
    expected = [f"{name} {100 * share:.0f} %" for name, share in fig.noise.contributors[:3]]
    assert joined == ", ".join(expected)
    quick = analyse(d, large_signal=False)  # no sweep yet: a placeholder keeps the height
    pending = readout_table(quick, None, shown_label="committed", reference_label="", tj_max=150.0).plain
    assert "  largest: …" in pending
