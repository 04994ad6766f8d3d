"""The workbench on a design of every topology, through Textual's Pilot: the
Knobs, the Readout of a two-transistor stage, and changing the topology.

Expected keys come from ``model.design.fields`` (``keys_for``), expected
designs from ``with_values`` and the saved file read back, never from a
previous run of the workbench.
"""

from __future__ import annotations

import pytest
from rich.cells import cell_len
from test_workbench import SCROLLBAR, SMALL, knobs, readout, region_text, screen_text, settle, status, type_into

from model.analyses.figures import analyse
from model.analyses.loadlines import design_load_lines
from model.circuit.topologies import FOLLOWER
from model.design.fields import CE, CEF, EF, FIELDS, TOPOLOGIES, TWO_TRANSISTORS
from model.design.stage import default_design, get_value, keys_for, with_values
from model.design.units import parse_value
from model.files.designfile import read_document
from model.files.session import create
from tui.fieldtext import field_text
from tui.launch import make_app
from tui.pictures import FOLLOWER_LINES, LOAD_LINES, PICTURES, charts_for, pictures_for
from tui.readout_table import ABSENT
from tui.topology_screen import WHAT, TopologyDialog
from tui.widgets.knobs import GROUPS, layout


def _design_file(tmp_path, topology: str) -> str:
    path = str(tmp_path / f"{topology}.toml")
    create(path, default_design(topology))
    return path


# -- 1. every topology opens, recomputes and commits ---------------------------


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_the_knobs_hold_exactly_the_topologys_keys_in_a_group_each(topology):
    design = default_design(topology)
    lines = layout(design)
    rows = [key for _, key in lines if key is not None]
    wanted = [k for k in keys_for(topology) if k not in ("topology", "notes")]
    assert sorted(rows) == sorted(wanted)
    assert len(rows) == len(set(rows))
    # Every key sits under the heading of its own table.
    headings = dict(GROUPS)
    current = None
    for label, key in lines:
        if key is None:
            current = label
        elif key != "name":
            assert current == headings[key.split(".")[0]], key


@pytest.mark.parametrize("topology", TOPOLOGIES)
async def test_every_topology_opens_recomputes_and_commits(tmp_path, topology):
    path = _design_file(tmp_path, topology)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        assert app.design.topology == topology
        panel = knobs(app)
        assert set(panel.keys) == set(keys_for(topology)) - {"topology", "notes"}
        # The supply is a key of every topology; 10 V is inside every rule
        # of it (fields.py: greater than 0 V, at most 1000 V).
        before = len(app.session.history)
        await type_into(pilot, "supply.vcc", "10")
        assert app.candidate is not None, status(app)
        assert app.candidate.design == with_values(app.design, {"supply.vcc": 10.0})
        await pilot.press("enter")
        await pilot.pause()
        assert len(app.session.history) == before + 1, status(app)
        entry = app.session.history[-1]
        assert [(c.key, c.new) for c in entry.changes] == [("supply.vcc", 10.0)]
        assert read_document(path).design == with_values(default_design(topology), {"supply.vcc": 10.0})
        await settle(pilot)
        assert app.figures.large_signal


@pytest.mark.parametrize("key", ["supply.vee", "bias.rf", "bias.rb", "stage.cb", "stage.re", "transistor2.beta"])
def test_the_new_keys_show_with_their_units(key):
    topology = next(t for t in TOPOLOGIES if key in keys_for(t))
    design = default_design(topology)
    panel_keys = [k for _, k in layout(design) if k is not None]
    assert key in panel_keys
    text = field_text(key, get_value(design, key))
    unit = FIELDS[key].unit
    if unit:
        assert text.endswith(unit) and " " in text, text
    # What the row shows reads back as the stored value.
    assert parse_value(text, unit) == get_value(design, key)


#: A key only some topologies have, with a value inside its rule (fields.py).
NEW_KEYS = (("supply.vee", "-12", -12.0), ("bias.rf", "100k", 100e3), ("bias.rb", "22k", 22e3),
            ("stage.cb", "22u", 22e-6), ("transistor2.beta", "150", 150.0))


@pytest.mark.parametrize("key, text, value", NEW_KEYS)
async def test_a_new_key_is_edited_and_committed_from_its_row(tmp_path, key, text, value):
    topology = next(t for t in TOPOLOGIES if key in keys_for(t))
    path = _design_file(tmp_path, topology)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, key, text)
        # The row is labelled by its key's own name, under its table's heading.
        assert str(app.query_one("#knob-label").content) == key.split(".")[1]
        above = str(app.query_one("#knobs-above").content).splitlines()
        heading = next(line for line in reversed(above) if line and not line.startswith(" ") and
                       line.strip() in dict(GROUPS).values())
        assert heading == dict(GROUPS)[key.split(".")[0]]
        await pilot.press("enter")
        await pilot.pause()
        entry = app.session.history[-1]
        assert [(c.key, c.new) for c in entry.changes] == [(key, value)], status(app)
        assert read_document(path).design == with_values(default_design(topology), {key: value})


# -- 2. the follower's figures in the Readout ------------------------------------


async def _readout_below_the_fold(pilot, heading: str = "headroom") -> str:
    """The Readout scrolled to put the group ``heading`` at its top (at 80×24
    the headroom and follower rows are below the fold)."""
    lines = str(pilot.app.query_one("#readout").content).splitlines()
    top = next(n for n, line in enumerate(lines) if line.strip() == heading)
    pilot.app.query_one("#readout-box").scroll_to(y=top, animate=False)
    await pilot.pause()
    return readout(pilot.app)


def _row(text: str, label: str) -> str:
    """The row for ``label``, without the scrollbar's column (test_workbench.SCROLLBAR)."""
    rows = [line.rstrip().rstrip(SCROLLBAR).strip() for line in text.splitlines()
            if line.strip().startswith(label + " ")]
    assert rows, f"no {label!r} row in:\n{text}"
    return rows[0]


def _value(row: str, label: str, unit: str) -> float:
    return parse_value(row.removeprefix(label).strip(), unit)


async def test_the_readout_shows_the_followers_figures_for_ce_follower(tmp_path):
    path = _design_file(tmp_path, CEF)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        design, fig = app.design, analyse(app.design)
        text = await _readout_below_the_fold(pilot)
        assert _row(text, "q2 region").endswith(fig.region2)
        ic2 = _value(_row(text, "q2 IC"), "q2 IC", "A")
        vce2 = _value(_row(text, "q2 VCE"), "q2 VCE", "V")
        p2 = _value(_row(text, "q2 p"), "q2 p", "W")
        tj2 = float(_row(text, "q2 tj").removeprefix("q2 tj").strip().removesuffix("°C"))
        # Three figures shown, so 0.5 % covers the rounding of the screen.
        assert ic2 == pytest.approx(fig.ic2, rel=5e-3) and vce2 == pytest.approx(fig.vce2, rel=5e-3)
        # Independent checks on what the screen shows.  The follower's
        # collector is on the supply and its emitter on re (cout blocks the
        # load at DC): KVL gives VCE2 = VCC − IE2·re, IE2 = IC2·(β+1)/β
        # (Sedra & Smith, the BJT's terminal currents; from memory).  The
        # bench's β2 is the nominal one; VA and the Early effect shift it by
        # well under 1 %, hence 2 %.
        beta2 = design.transistor2.beta
        ie2 = ic2 * (beta2 + 1) / beta2
        assert vce2 == pytest.approx(design.supply.vcc - ie2 * design.stage.re, rel=2e-2)
        # A transistor dissipates about IC·VCE (the base current's share is
        # 1/β of it): common practice.
        assert p2 == pytest.approx(ic2 * vce2, rel=2e-2)
        # Junction temperature from the thermal resistance: Tj = Ta + θJA·P
        # (the definition of θJA, JEDEC JESD51-2; from memory).
        assert tj2 == pytest.approx(design.environment.ambient + design.transistor.theta_ja * p2, abs=0.2)
        # ... shown against the limit the two share.
        assert _row(text, "tj_max").endswith(f"{design.transistor.tj_max:g} °C")
        assert text.index("q2 tj") < text.index("tj_max")


@pytest.mark.parametrize("topology", [t for t in TOPOLOGIES if t not in TWO_TRANSISTORS])
async def test_one_transistor_stages_show_no_follower_rows(tmp_path, topology):
    app = make_app(_design_file(tmp_path, topology))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        text = await _readout_below_the_fold(pilot)
        assert "q2" not in text and "follower q2" not in text
        assert "tj_max" in text


async def test_the_follower_rows_fit_at_80x24_beside_a_candidate(tmp_path):
    app = make_app(_design_file(tmp_path, CEF))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "transistor2.beta", "100")
        await settle(pilot)
        assert app.candidate is not None, status(app)
        table = app.query_one("#readout").content
        box = app.query_one("#readout").content_region
        # Every line of the comparison, the widest the Readout gets, fits its box.
        assert max(cell_len(line) for line in table.plain.splitlines()) <= box.width
        text = await _readout_below_the_fold(pilot)
        row = _row(text, "q2 IC")
        before, after = analyse(app.design, large_signal=False), app.candidate.figures
        # A lower β2 draws more base current from q1's collector, so IC2 falls
        # a little, and the row says so.
        assert after.ic2 < before.ic2
        assert row.endswith("↓")


# -- 3. changing the topology from the keyboard ------------------------------------


async def _choose(pilot, topology: str) -> None:
    """In the open dialog: the arrows from the present topology to ``topology``, then Enter."""
    app = pilot.app
    assert isinstance(app.screen, TopologyDialog)
    steps = TOPOLOGIES.index(topology) - TOPOLOGIES.index(app.design.topology)
    await pilot.press(*(["down"] * steps if steps > 0 else ["up"] * -steps), "enter")
    await pilot.pause()


def _knob_keys(topology: str) -> set:
    return set(keys_for(topology)) - {"topology", "notes"}


async def test_ctrl_r_changes_the_topology_as_one_logged_entry_and_undo_brings_it_back(tmp_path):
    path = _design_file(tmp_path, CE)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        old = app.design
        before = len(app.session.history)
        await pilot.press("ctrl+r")
        await pilot.pause()
        dialog = app.screen
        assert isinstance(dialog, TopologyDialog)
        # The present topology is where the highlight starts.
        assert dialog.query_one("#topology-list").highlighted == TOPOLOGIES.index(CE)
        # At 80×24 each topology is one row, its name beside what it is.
        lines = screen_text(app).splitlines()
        for t in TOPOLOGIES:
            assert sum(t in line.split() and WHAT[t] in line for line in lines) == 1, t
        await _choose(pilot, CEF)
        assert not isinstance(app.screen, TopologyDialog)

        history = app.session.history
        assert len(history) == before + 1, status(app)
        entry = history[-1]
        changed = {c.key: (c.old, c.new) for c in entry.changes}
        assert changed["topology"] == (CE, CEF)
        # The keys only ce-follower has start from its defaults; shared ones keep theirs.
        new = app.design
        assert new == with_values(old, {"topology": CEF})
        assert new.transistor2.beta == default_design(CEF).transistor2.beta
        assert new.stage.rc == old.stage.rc and new.supply.vcc == old.supply.vcc
        assert read_document(path).design == new
        # The Knobs were rebuilt for the new stage, and the Readout has its follower.
        assert set(knobs(app).keys) == _knob_keys(CEF)
        await settle(pilot)
        assert "q2 IC" in await _readout_below_the_fold(pilot)

        # Undo is a new entry that brings the old topology and its keys back.
        await pilot.press("f7")
        await pilot.pause()
        assert app.session.history[-1].action == "undo"
        assert app.design == old
        assert set(knobs(app).keys) == _knob_keys(CE)
        assert read_document(path).design == old
        await settle(pilot)
        assert "q2" not in await _readout_below_the_fold(pilot)
        # And redo goes forward again.
        await pilot.press("f8")
        await pilot.pause()
        assert app.design == new and set(knobs(app).keys) == _knob_keys(CEF)


@pytest.mark.parametrize("topology", TOPOLOGIES)
async def test_every_topology_can_be_reached_from_the_dialog(tmp_path, topology):
    start = CE if topology != CE else EF
    path = _design_file(tmp_path, start)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        old = app.design
        await pilot.press("ctrl+r")
        await pilot.pause()
        await _choose(pilot, topology)
        assert app.design == with_values(old, {"topology": topology}), status(app)
        assert set(knobs(app).keys) == _knob_keys(topology)
        assert app.session.history[-1].action == "set"
        # The editor sits on a row of the new stage, and editing goes on there.
        await type_into(pilot, "supply.vcc", "10")
        await pilot.press("enter")
        await pilot.pause()
        assert read_document(path).design == with_values(old, {"topology": topology, "supply.vcc": 10.0})


async def test_the_palette_offers_the_topology_dialog_and_cancelling_logs_nothing(tmp_path):
    path = _design_file(tmp_path, CE)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        before = len(app.session.history)
        await pilot.press("ctrl+p")
        await pilot.pause()
        await pilot.press(*"Change the topology")
        await pilot.pause(0.3)
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, TopologyDialog)
        # F9, Esc's twin, closes it with nothing changed.
        await pilot.press("down", "f9")
        await pilot.pause()
        assert not isinstance(app.screen, TopologyDialog)
        # Choosing the present topology changes nothing either.
        await pilot.press("ctrl+r")
        await pilot.pause()
        await pilot.press("enter")
        await pilot.pause()
        assert "nothing to change" in status(app)
        assert len(app.session.history) == before and app.design.topology == CE
        assert app.focused is knobs(app).editor


async def test_pending_values_on_shared_keys_stay_pending_across_a_topology_change(tmp_path):
    app = make_app(_design_file(tmp_path, CE))
    async with app.run_test(size=SMALL) as pilot:
        await type_into(pilot, "supply.vcc", "10")
        assert app.candidate is not None
        await pilot.press("ctrl+r")
        await pilot.pause()
        await _choose(pilot, EF)
        assert app.design.topology == EF and app.design.supply.vcc == default_design(CE).supply.vcc
        # The supply is a key of both: its pending value is still the candidate's.
        assert app.candidate is not None and dict(app.candidate.changes) == {"supply.vcc": "10"}
        await type_into(pilot, "stage.re", "3k3")  # an emitter follower's own key
        await pilot.press("ctrl+r")
        await pilot.pause()
        await _choose(pilot, CE)
        # re1 and re2 replace re in a common emitter: the pending re is dropped, and said.
        assert app.design.topology == CE
        assert app.candidate is None or "stage.re" not in app.candidate.changes
        assert "dropped the pending" in status(app)


async def test_a_baseline_of_another_topology_shows_the_follower_rows_as_absent(tmp_path):
    app = make_app(_design_file(tmp_path, CE))
    async with app.run_test(size=SMALL) as pilot:
        await pilot.press("f4")  # pin the common emitter
        await pilot.press("ctrl+r")
        await pilot.pause()
        await _choose(pilot, CEF)
        await settle(pilot)
        text = await _readout_below_the_fold(pilot)
        row = _row(text, "q2 IC")
        cells = row.removeprefix("q2 IC").split()
        # baseline, now, change: the baseline had no q2, so no change is claimed.
        assert cells[0] == ABSENT and parse_value(" ".join(cells[1:3]), "A") == pytest.approx(
            app.figures.ic2, rel=5e-3)
        assert len(cells) == 3


# -- 4. the follower's load lines ----------------------------------------------------


def _par(a: float, b: float) -> float:
    return a * b / (a + b)


@pytest.mark.parametrize("changes", [{}, {"stage.re": 2.2e3, "load.rl": 10e3}, {"supply.vcc": 15.0, "load.rl": 150.0}])
def test_the_followers_load_lines_are_the_closed_forms(changes):
    design = with_values(default_design(CEF), changes)
    ll = design_load_lines(design, FOLLOWER)
    s = design.stage
    # With q2 taken out, its collector sits on the supply and its emitter has
    # only re to ground at DC (cout open), and re ∥ rl at midband (cout
    # shorted): the textbook emitter-follower lines (Sedra & Smith, the
    # emitter follower's load lines; from memory).
    assert ll.vce_open == pytest.approx(design.supply.vcc, rel=1e-9)
    assert ll.r_dc == pytest.approx(s.re, rel=1e-9)
    assert ll.r_ac == pytest.approx(_par(s.re, design.load.rl), rel=1e-9)
    # KVL round the follower: VCE2 = VCC − (IC2 + IB2)·re, so the Q-point is
    # off the IE ≈ IC line by IB2·re (to the solver's KCL tolerance).
    fig = analyse(design, large_signal=False)
    assert ll.ic_q == pytest.approx(fig.ic2, rel=1e-12)
    assert ll.vce_q == pytest.approx(ll.vce_open - ll.ic_q * ll.r_dc - fig.ib2 * s.re, abs=1e-7 * design.supply.vcc)


def test_the_follower_picture_draws_its_lines_and_q_point():
    design = default_design(CEF)
    fig = analyse(design)
    ll = design_load_lines(design, FOLLOWER)
    (chart,) = charts_for(FOLLOWER_LINES, design, fig)
    dc, ac = chart.series
    # Every drawn point lies on its line: IC = (VCC − VCE)/re on the DC line,
    # through Q with slope −1/(re ∥ rl) on the AC one (the closed forms above).
    s, rl = design.stage, design.load.rl
    assert dc.y == pytest.approx((design.supply.vcc - dc.x) / s.re, rel=1e-9)
    assert ac.y == pytest.approx(ll.ic_q + (ll.vce_q - ac.x) / _par(s.re, rl), rel=1e-9, abs=1e-15)
    (q,) = chart.spots
    assert (q.x, q.y, q.symbol) == (pytest.approx(fig.vce2, rel=1e-9), pytest.approx(fig.ic2, rel=1e-9), "Q")
    # A one-transistor stage has no such picture.
    assert FOLLOWER_LINES not in pictures_for(default_design(CE))
    assert charts_for(FOLLOWER_LINES, default_design(CE), analyse(default_design(CE))) == ()


async def test_f6_shows_the_followers_load_lines_after_the_gain_transistors(tmp_path):
    app = make_app(_design_file(tmp_path, CEF))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        seen = []
        for _ in range(len(PICTURES) + 1):
            seen.append(app.picture_kind)
            await pilot.press("f6")
            await settle(pilot)
        # The first F6 at 80×24 only brings the pictures on show.
        at = PICTURES.index(LOAD_LINES)
        assert seen == [PICTURES[0], *PICTURES[:at + 1], FOLLOWER_LINES, *PICTURES[at + 1:-1]]
        while app.picture_kind != FOLLOWER_LINES:
            await pilot.press("f6")
            await settle(pilot)
        shown = region_text(app, "#pictures-box")
        assert "Load lines of q2" in shown and "Q Q-point" in shown and "AC load line" in shown
        # Back to a stage of one transistor: the picture falls back to its load lines.
        await pilot.press("ctrl+r")
        await pilot.pause()
        await _choose(pilot, CE)
        await settle(pilot)
        assert app.picture_kind == LOAD_LINES
        shown = region_text(app, "#pictures-box")
        assert "Load lines" in shown and "q2" not in shown


async def test_the_readout_says_which_transistor_ends_the_swing(tmp_path):
    # A heavy load on the follower: its emitter current cannot fall below 0,
    # so the output cannot go lower than −IE2·(re ∥ rl) (the follower's
    # cut-off, the textbook class-A limit; Horowitz & Hill, the emitter
    # follower's swing into a load; from memory).
    design = with_values(default_design(CEF), {"load.rl": 100.0})
    path = str(tmp_path / "heavy.toml")
    create(path, design)
    app = make_app(path)
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        fig = app.figures
        ie2 = fig.ic2 + fig.ib2
        assert fig.swing_down == pytest.approx(ie2 * _par(design.stage.re, design.load.rl), rel=0.05)
        text = await _readout_below_the_fold(pilot)
        assert "down: q2 cutoff" in text
    app = make_app(_design_file(tmp_path, CE))
    async with app.run_test(size=SMALL) as pilot:
        await settle(pilot)
        assert "down:" not in readout(app) and "down:" not in await _readout_below_the_fold(pilot)
