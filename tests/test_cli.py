"""The command line: output, JSON shape, exit codes and one-line errors."""

from __future__ import annotations

import json
import math
import pathlib
import subprocess
import sys

import pytest

from model.analysis import FIGURE_KEYS
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "saved_designs").glob("*.toml"))


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "tui", *args], capture_output=True, text=True,
                          cwd=cwd or ROOT, timeout=120)


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_json_report_has_exactly_the_documented_keys(demo, capsys):
    assert main(["report", str(demo), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert list(data)[: len(FIGURE_KEYS)] == list(FIGURE_KEYS)
    assert set(data["hand"]) == {"ic", "vce", "re", "av_open", "av_loaded", "rin"}
    assert all(set(w) == {"code", "message"} for w in data["warnings"])
    assert data["region"] in ("active", "saturation", "cutoff")
    for key in FIGURE_KEYS[1:]:
        assert data[key] is None or math.isfinite(data[key]), key


def test_json_matches_the_python_api(capsys):
    import model

    demo = DEMOS[0]
    assert main(["report", str(demo), "--json"]) == 0
    printed = json.loads(capsys.readouterr().out)
    direct = json.loads(json.dumps(model.analyse(model.read_design(demo)).to_dict()))
    assert printed == direct


def test_text_report_fits_80_columns_and_names_the_sections(capsys):
    assert main(["report", str(DEMOS[0])]) == 0
    out = capsys.readouterr().out
    assert max(len(line) for line in out.splitlines()) <= 80
    for heading in ("Operating point", "hand estimate", "Midband", "Headroom", "Dissipation",
                    "Frequency response", "Warnings"):
        assert heading in out


def test_no_arguments_opens_the_bundled_demo_without_writing_to_it():
    from tui.bundled import default_demo
    from tui.launch import make_app

    app = make_app(None)
    assert app.session is None and app.source == str(default_demo())
    assert app.design.name.startswith("Geophone")


@pytest.mark.parametrize(
    "content, expected",
    [
        ("format = 1\n[bias]\nr1 = 0\n", "bias.r1"),
        ("format = 1\n[stage]\nrcc = 10\n", "stage.rcc"),
        ("format = 1\n[supply]\nvcc = 'lots'\n", "supply.vcc"),
        ("format = 1\n[supply\nvcc = 9\n", ":2"),
        ("format = 2\n", "format"),
    ],
)
def test_bad_file_exits_2_with_one_line_and_leaves_it_untouched(tmp_path, content, expected):
    path = tmp_path / "bad.toml"
    path.write_text(content, encoding="utf-8")
    before = path.read_bytes()
    proc = run("report", str(path))
    assert proc.returncode == 2
    assert proc.stdout == ""
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in proc.stderr
    assert str(path) in lines[0] and expected in lines[0]
    assert path.read_bytes() == before


def test_missing_file_and_bad_arguments_exit_2(tmp_path):
    proc = run("report", str(tmp_path / "absent.toml"))
    assert proc.returncode == 2 and "absent.toml" in proc.stderr
    proc = run("report")
    assert proc.returncode == 2 and proc.stderr.count("\n") == 1
    proc = run("frobnicate")
    assert proc.returncode == 2 and "Traceback" not in proc.stderr


def test_installed_package_carries_the_demo_designs(tmp_path):
    # Run from an empty folder so the source tree is not on the path: the
    # installed package must carry its demos (README's install step).
    code = ("from tui.bundled import default_demo; p = default_demo(); "
            "print(p.is_file() and p.parent.name == 'demos')")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert proc.stdout.strip() == "True", proc.stderr
