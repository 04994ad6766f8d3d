"""The README documents what the code does: every file key and figure key."""

import pathlib
import re

from model.analyses.figures import FIGURE_KEYS
from model.design.stage import FIELDS

README = (pathlib.Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def test_every_design_key_is_in_the_file_reference():
    missing = [k for k in FIELDS if f"`{k}`" not in README]
    assert missing == []


def test_every_json_figure_key_is_defined():
    missing = [k for k in FIGURE_KEYS if f"`{k}`" not in README]
    assert missing == []


def test_quick_start_has_exactly_two_commands_and_ci_runs_the_test_one():
    quick = README.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    commands = re.findall(r"```sh\n(.*?)\n```", quick, flags=re.S)
    assert len(commands) == 2
    ci = (pathlib.Path(__file__).resolve().parents[1] / ".ci" / "run").read_text(encoding="utf-8")
    assert commands[1].strip() in ci.splitlines()


def test_the_spread_tables_and_json_keys_are_documented():
    from model.design.spread_tables import spread_keys
    from model.design.stage import default_design, with_values
    from model.spread.analysis import spread_report

    section = README.split("## Spread", 1)[1].split("\n## ", 1)[0]
    own = {k.split(".")[1] for k in spread_keys("common-emitter") if k.count(".") == 1 and k.startswith("tolerance.")}
    assert [k for k in sorted(own) if f"{k} = " not in section] == []
    design = with_values(default_design(), {"tolerance.resistors": 0.01, "tolerance.ambient": "0..40",
                                            "spec.ic": "0..1"})
    data = spread_report(design, 20).to_dict()
    assert [k for k in data if f"`{k}" not in section] == []
