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


def test_every_subcommand_and_its_options_are_in_the_command_table():
    """Each subcommand has a row, and the row names each of its options;
    --drop-comments is documented once, under Saving safely."""
    from tui.cli import _parser

    commands = README.split("## Commands", 1)[1].split("\n## ", 1)[0]
    rows = [line for line in commands.splitlines() if line.startswith("| `stageledger ")]
    (subparsers,) = [a for a in _parser()._actions if a.choices and isinstance(a.choices, dict)]
    missing = []
    for name, parser in subparsers.choices.items():
        own = [r for r in rows if re.search(rf"`stageledger {name}[ `]", r)]
        options = [o for a in parser._actions for o in a.option_strings if o.startswith("--") and o != "--help"]
        missing += [name] if not own else [f"{name} {o}" for o in options
                                           if o != "--drop-comments" and not any(o in r for r in own)]
    assert missing == []
    assert "--drop-comments" in README


def test_new_documents_its_starting_values():
    row = next(line for line in README.splitlines() if line.startswith("| `stageledger new "))
    assert "KEY=VALUE" in row.split("|")[1]


def test_the_introduction_promises_only_the_stages_that_are_built():
    """Issue 15: the README once promised two-transistor stages before there
    were any beyond ce-follower. The opening counts the topologies and names
    every two-transistor one, and the Topologies table has a row for each."""
    from model.design.fields import TOPOLOGIES, TWO_TRANSISTORS

    intro = README.split("\n## ", 1)[0]
    words = {6: "six", 7: "seven", 8: "eight", 9: "nine"}
    assert f"{words[len(TOPOLOGIES)]} [topologies]" in intro
    assert f"{words[len(TOPOLOGIES) - len(TWO_TRANSISTORS)]} of them one transistor" in intro
    assert all(f"`{t}`" in intro for t in TWO_TRANSISTORS)
    table = README.split("### Topologies", 1)[1].split("\n## ", 1)[0]
    assert [t for t in TOPOLOGIES if f"| `{t}` |" not in table] == []
