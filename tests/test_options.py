"""options: every usual way to a target, ranked by cost, checked on re-analysed figures."""

from __future__ import annotations

import json
import math
import pathlib

import pytest

from model import analyse, read_design
from model.advisor.options import COST_FIGURES, NEGLIGIBLE, options
from model.design.stage import get_value
from model.files.session import ledger_yield
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMO = ROOT / "saved_designs" / "geophone_preamp.toml"


@pytest.fixture(scope="module")
def demo():
    return read_design(str(DEMO))


@pytest.fixture(scope="module")
def ways(demo):
    return options(demo, "av_loaded", "-40")


def test_reached_ways_come_first_cheapest_first(ways):
    reached = [o for o in ways if o.reached]
    assert len(reached) >= 2
    assert ways[:len(reached)] == reached
    costs = [o.cost for o in reached]
    assert costs == sorted(costs)
    assert all(o.why for o in ways[len(reached):])


def test_each_way_reaches_near_the_target_when_re_analysed(ways):
    for o in (o for o in ways if o.reached):
        fig = analyse(o.design)
        assert fig.av_loaded == pytest.approx(o.figure, rel=1e-12)
        # Snapped to the series: within one E24 step (≤ 10 % in value, so well
        # within 15 % in gain) of the target.
        assert abs(fig.av_loaded / -40 - 1) < 0.15, o.name


def test_costs_are_the_log_losses_of_re_analysed_figures(demo, ways):
    before = analyse(demo)
    y0 = ledger_yield(demo)
    for o in (o for o in ways if o.reached):
        after = analyse(o.design)
        y1 = ledger_yield(o.design)
        expected = 0.0
        for k, better in COST_FIGURES.items():
            b, a = (y0, y1) if k == "yield" else (getattr(before, k), getattr(after, k))
            if k == "av_loaded" or not (math.isfinite(b) and math.isfinite(a)) or b <= 0:
                continue
            # The documented cost: |ln ratio| when worse, the ratio clipped to
            # [1e-3, 1e3] (a yield that falls to 0 costs ln 1000).
            ratio = min(max(a / b, 1e-3), 1e3)
            loss = max(0.0, -better * math.log(ratio))
            expected += loss if loss > NEGLIGIBLE else 0.0
        assert o.cost == pytest.approx(expected, rel=1e-9, abs=1e-12), o.name
        for x in o.losses:
            got = y1 if x.figure == "yield" else getattr(after, x.figure)
            assert x.after == pytest.approx(got, rel=1e-12)


def test_words_name_the_move_and_the_losses(demo, ways):
    before = analyse(demo)
    for o in (o for o in ways if o.reached):
        words = o.words(demo)
        for k, v in o.values.items():
            verb = "raise" if v > float(get_value(demo, k)) else "lower"
            assert f"{verb} {k} to" in words
        for x in o.losses:
            assert x.figure in words
            if x.figure in ("swing_up", "swing_down"):
                dv = getattr(analyse(o.design), x.figure) - getattr(before, x.figure)
                assert f"{dv:+.2f} V" in words  # ASCII, as the command line writes numbers
            if x.figure in ("thd", "yield"):
                # A loss is over NEGLIGIBLE, so its two ends never read alike.
                before_text, after_text = words.split(f"{x.figure} ", 1)[1].split(" %")[0:2]
                assert before_text != after_text.removeprefix(" → ")


def test_the_aimed_figure_is_never_a_cost(ways):
    assert all(x.figure != "av_loaded" for o in ways for x in o.losses)


def test_unreachable_ways_say_why(ways):
    caps = [o for o in ways if o.name == "stage.cout"]
    assert caps and not caps[0].reached and "cannot reach" in caps[0].why


def test_source_and_load_are_not_tried(ways):
    assert not any(k in ("source.rs", "load.rl") for o in ways for k in o.keys)


def test_the_command_prints_and_the_json_parses(capsys):
    assert main(["options", str(DEMO), "av_loaded=-40"]) == 0
    out = capsys.readouterr().out
    assert "cheapest first" in out and "1. " in out and "cannot:" in out
    assert main(["options", str(DEMO), "av_loaded=-40", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["figure"] == "av_loaded" and data["options"][0]["reached"]
    assert data["options"][0]["words"].startswith(("raise", "lower"))


def test_a_bad_target_exits_2(capsys):
    assert main(["options", str(DEMO), "bogus=3"]) == 2
    assert "bogus" in capsys.readouterr().err


def test_a_larger_emitter_resistance_costs_its_johnson_noise(demo):
    """Raising the unbypassed re1 lowers the gain and adds its own thermal
    noise √(4kT·re1) in series with the input (Johnson 1928, Nyquist 1928):
    the way must show en_total among what it gives up."""
    ways = options(demo, "av_loaded", "-30")
    way = next(o for o in ways if o.reached and o.keys == ("stage.re1",))
    assert way.values["stage.re1"] > get_value(demo, "stage.re1")
    loss = next(x for x in way.losses if x.figure == "en_total")
    assert loss.before == pytest.approx(analyse(demo).en_total, rel=1e-12)
    assert loss.after == pytest.approx(analyse(way.design).en_total, rel=1e-12)
    assert loss.after > loss.before
