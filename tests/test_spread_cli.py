"""`stageledger spread` on the command line: text, --json, --csv and the
one-line errors."""

from __future__ import annotations

import csv
import io
import json
import math

import pytest

from model.design.stage import default_design, with_values
from model.files.designfile import dumps_design
from model.spread.analysis import spread_report
from model.spread.builds import DEFAULT_SEED
from tui.cli import main
from tui.spread_text import percent

SPREAD = {"tolerance.resistors": 0.02, "tolerance.beta": "100..300", "tolerance.ambient": "0..40",
          "spec.av_loaded": "-30..-20", "spec.swing_down": "1..none"}


@pytest.fixture
def toleranced(tmp_path):
    path = tmp_path / "d.toml"
    path.write_text(dumps_design(with_values(default_design(), SPREAD)), encoding="utf-8")
    return path


def test_text_names_the_seed_the_yield_and_a_rebuild_line(toleranced, capsys):
    assert main(["spread", str(toleranced), "--samples", "300"]) == 0
    out = capsys.readouterr().out
    report = spread_report(with_values(default_design(), SPREAD), 300, DEFAULT_SEED)
    y = report.yields.all
    assert f"seed {DEFAULT_SEED}" in out and "300 builds" in out
    assert f"yield {percent(y.value)} " in out and f"{y.passed:,} of 300 builds pass" in out
    corners = 2 ** len(report.evaluated.spread.keys)  # r1, r2, rc, re1, re2, β and the ambient
    assert corners == 128 and f"worst cases (all {corners:,} corners" in out
    assert f"stageledger set {toleranced} --dry-run" in out
    assert "drivers (share of the variance" in out and "temperature (parts nominal)" in out
    # Every line fits 80 columns but those that carry the (here long) path.
    assert max(len(line) for line in out.splitlines() if str(toleranced) not in line) <= 80


def test_json_is_strict_and_matches_the_engine(toleranced, capsys):
    assert main(["spread", str(toleranced), "--samples", "300", "--seed", "7", "--json"]) == 0
    data = json.loads(capsys.readouterr().out, parse_constant=lambda c: pytest.fail(f"non-finite {c}"))
    report = spread_report(with_values(default_design(), SPREAD), 300, 7)
    assert data["seed"] == 7 and data["samples"] == 300
    assert data["yield"]["all"]["value"] == pytest.approx(report.yields.all.value)
    assert data["figures"]["ic"]["p50"] == pytest.approx(report.summaries["ic"].p50)


def test_csv_has_one_row_per_build_with_numbers(toleranced, capsys):
    assert main(["spread", str(toleranced), "--samples", "50", "--csv"]) == 0
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out)))
    head, body = rows[0], rows[1:]
    assert len(body) == 50 and head[0] == "build" and "region" in head and "av_loaded" in head
    at = head.index("region")
    for row in body:
        assert all(math.isfinite(float(c)) for c in row[1:at])
        assert all(c == "" or math.isfinite(float(c)) for c in row[at + 1:])


def test_the_same_seed_prints_the_same_and_another_does_not(toleranced, capsys):
    outs = []
    for seed in ("3", "3", "4"):
        main(["spread", str(toleranced), "--samples", "100", "--seed", seed, "--json"])
        outs.append(capsys.readouterr().out)
    assert outs[0] == outs[1] != outs[2]


def test_a_file_without_tables_says_so(tmp_path, capsys):
    path = tmp_path / "plain.toml"
    path.write_text(dumps_design(default_design()), encoding="utf-8")
    assert main(["spread", str(path), "--samples", "20"]) == 0
    out = capsys.readouterr().out
    assert "no tolerance in the file" in out and "no [spec] table" in out
    assert main(["spread", str(path), "--samples", "20", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["yield"] is None


@pytest.mark.parametrize("argv, words", [
    (["--samples", "0"], "--samples 0 must be from 1 to 200,000"),
    (["--samples", "lots"], "--samples 'lots' must be a whole number"),
    (["--samples", "300000"], "must be from 1 to 200,000"),
    (["--seed", "-1"], "--seed -1 must be from 0"),
    (["--json", "--csv"], "not allowed with argument"),
])
def test_bad_arguments_exit_2_with_one_line(toleranced, capsys, argv, words):
    with pytest.raises(SystemExit) as stop:
        main(["spread", str(toleranced), *argv])
    assert stop.value.code == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and words in err


def test_a_missing_file_exits_2(tmp_path, capsys):
    assert main(["spread", str(tmp_path / "nope.toml")]) == 2
    assert "no such file" in capsys.readouterr().err
