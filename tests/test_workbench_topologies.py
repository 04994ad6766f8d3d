"""The workbench on a design of every topology, through Textual's Pilot: the
Knobs, the Readout of a two-transistor stage, and changing the topology.

Expected keys come from ``model.design.fields`` (``keys_for``), expected
designs from ``with_values`` and the saved file read back, never from a
previous run of the workbench.
"""

from __future__ import annotations

import pytest
from test_workbench import SMALL, knobs, settle, status, type_into

from model.design.fields import FIELDS, TOPOLOGIES
from model.design.stage import default_design, get_value, keys_for, with_values
from model.design.units import parse_value
from model.files.designfile import read_document
from model.files.session import create
from tui.fieldtext import field_text
from tui.launch import make_app
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
