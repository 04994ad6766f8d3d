"""The command line: output, JSON shape, exit codes and one-line errors."""

from __future__ import annotations

import json
import math
import pathlib
import re
import shutil
import subprocess
import sys

import pytest

from model.analyses.figures import FIGURE_KEYS
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



def _report_of(tmp_path, capsys, values):
    from model.design.stage import default_design, with_values
    from model.files.designfile import dumps_design

    design = with_values(default_design("common-emitter"), values)
    path = tmp_path / "d.toml"
    path.write_text(dumps_design(design), encoding="utf-8")
    assert main(["report", str(path)]) == 0
    return design, capsys.readouterr().out.splitlines()


def test_a_saturated_stage_marks_the_hand_estimate_as_out_of_its_region(tmp_path, capsys):
    """r2 = 47 kΩ saturates the default stage.  The textbook method assumes
    forward-active (Sedra & Smith; Boylestad & Nashelsky) and goes on to a
    negative VCE: the report prints it as computed and says why it is off."""
    import model
    from model.analyses.hand import hand_estimate

    design, lines = _report_of(tmp_path, capsys, {"bias.r2": 47e3})
    assert model.analyse(design).region == "saturation" and hand_estimate(design).vce < 0
    row = next(i for i, line in enumerate(lines) if line.split()[:1] == ["VCE"])
    assert lines[row + 1].strip() == "(hand method assumes forward-active; the stage saturates)"
    assert max(map(len, lines)) <= 80
    # An active stage has no such line.
    _, lines = _report_of(tmp_path, capsys, {})
    assert not any("assumes forward-active" in line for line in lines)


def test_numbers_that_show_as_zero_carry_no_sign():
    """A sign on a figure that shows as zero (−0.0, or −0.00004 at one place)
    points a way it does not go; a zero gain has no dB at all."""
    from tui.consequences import show_figure
    from tui.report import _db, _gain

    assert _gain(-0.99999) == "-1.000 V/V (0.0 dB)"  # 20·log10(0.99999) = −8.7e-5 dB
    assert _gain(0.0) == _gain(-0.0) == "0 V/V (zero gain, no dB)"
    assert _db(-1.0) == "0.0 dB"
    assert _gain(-10.0) == "-10.00 V/V (+20.0 dB)"
    assert show_figure("av_loaded", -0.0) == show_figure("av_loaded", 0.0) == "0 V/V"


def test_a_gain_just_under_one_shows_its_db_in_significant_figures():
    """20·log10(0.9944) = −0.0488 dB (arithmetic): one decimal would print
    the sign of nothing, −0.0."""
    from tui.number_text import db_text
    from tui.report import _gain

    assert _gain(0.9944) == "+0.9944 V/V (-0.049 dB)"
    assert db_text(-0.0488) == "-0.049" and db_text(27.44) == "+27.4" and db_text(-0.05) == "-0.1"


@pytest.mark.parametrize("gains, shown", [
    ((-10.0, -8.839), ("-10.00", "-8.839")), ((0.5, 0.9943), ("+0.5000", "+0.9943")),
    ((100.0, 1234.5), ("+100.0", "+1234")),
])
def test_gains_side_by_side_are_shown_to_the_same_figures(gains, shown):
    """Four significant figures, trailing zeros kept: -10.00 beside -8.839, not -10."""
    from tui.consequences import show_figure
    from tui.number_text import gain_text
    from tui.readout_table import show

    assert tuple(gain_text(g) for g in gains) == shown
    assert tuple(show_figure("av_loaded", g) for g in gains) == tuple(f"{s} V/V" for s in shown)
    assert tuple(show(g, "gain", compact=True) for g in gains) == shown


def test_aim_writes_its_target_as_the_gains_it_finds(tmp_path, capsys):
    """The target -10 V/V is written -10.00 V/V, as the four-figure gains beside it."""
    from model.design.stage import default_design
    from model.files.session import create

    path = tmp_path / "a.toml"
    create(str(path), default_design())
    assert main(["aim", str(path), "av_loaded=-10", "--vary", "stage.rc", "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("aim av_loaded at -10.00 V/V by stage.rc")
    gains = re.findall(r"gives ([-+]\d\S*) V/V", out)
    assert gains and all(len(g.lstrip("+-").replace(".", "")) == 4 for g in gains), gains


def test_a_cut_off_stage_prints_its_zero_hand_gains_unsigned(tmp_path, capsys):
    """No coupling capacitors: rs joins r2 and the stage is cut off, so the
    hand estimate's gains are exactly 0 (no current, no gm)."""
    _, lines = _report_of(tmp_path, capsys, {"stage.cin": "none", "stage.cout": "none"})
    for label in ("av_open", "av_loaded"):
        row = next(line for line in lines if line.split()[:1] == [label])
        assert row.endswith(" 0 V/V") and "+0 " not in row and "-0 " not in row, row

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


#: Run in a child from a folder of its own, so the current folder cannot put
#: a source tree on the path: it prints which kind of install it imported
#: (from the package's own metadata, PEP 610's direct_url.json), where the
#: `tui` package came from, and where the default demo was found.
WHICH_INSTALL = r"""
import json, importlib.metadata as md, pathlib, tui
from tui.bundled import default_demo
here = pathlib.Path(tui.__file__).resolve().parent
kind = "source tree"
try:
    dist = md.distribution("stageledger")
except md.PackageNotFoundError:
    dist = None
# pip writes INSTALLER; an .egg-info a build left in a source tree has none.
if dist is not None and dist.read_text("INSTALLER") and \
        here == pathlib.Path(dist.locate_file("tui/__init__.py")).resolve().parent:
    kind = "installed"
if dist is not None and json.loads(dist.read_text("direct_url.json") or "{}").get("dir_info", {}).get("editable"):
    root = pathlib.Path(json.loads(dist.read_text("direct_url.json"))["url"].removeprefix("file://"))
    if here.parent == root.resolve():
        kind = "editable"
print(json.dumps({"kind": kind, "package": str(here), "demo": str(default_demo())}))
"""


def _read_demo_name(path: str) -> str:
    from model import read_design

    return read_design(path).name


def test_installed_package_carries_the_demo_designs(tmp_path, record_property):
    """Whatever install this interpreter has (regular or editable), `stageledger`
    with no file must find the demo from any folder: the default demo is a
    file, it is the one the package's own tree ships (beside the package or in
    the package data), and it reads as the geophone preamp."""
    proc = subprocess.run([sys.executable, "-c", WHICH_INSTALL], capture_output=True, text=True,
                          cwd=tmp_path, timeout=120)
    if "No module named 'tui'" in proc.stderr:
        pytest.skip("stageledger is not installed in this interpreter (source-tree runs are "
                    "checked by test_a_source_tree_opens_its_own_demo)")
    assert proc.returncode == 0, proc.stderr
    seen = json.loads(proc.stdout)
    record_property("install_kind", seen["kind"])
    print(f"saw the {seen['kind']} case: package {seen['package']}, demo {seen['demo']}")  # -rP shows it
    package, demo = pathlib.Path(seen["package"]), pathlib.Path(seen["demo"])
    assert seen["kind"] in ("installed", "editable"), seen
    assert demo.is_file(), seen
    shipped = package / "demos" if seen["kind"] == "installed" else package.parent / "saved_designs"
    assert demo.parent == shipped, f"{seen['kind']} install: {seen}"
    assert _read_demo_name(str(demo)).startswith("Geophone"), seen


def test_a_source_tree_opens_its_own_demo(tmp_path):
    """A source tree run with `python -m tui` (nothing installed from it) opens
    the demo in its own saved_designs/, even where another checkout is
    installed editable: a copy of this tree with a renamed demo must show the
    new name."""
    tree = tmp_path / "checkout"
    for part in ("model", "tui", "saved_designs"):
        shutil.copytree(ROOT / part, tree / part, ignore=shutil.ignore_patterns("__pycache__"))
    demo = tree / "saved_designs" / "geophone_preamp.toml"
    text = demo.read_text(encoding="utf-8")
    assert 'name = "Geophone' in text
    demo.write_text(text.replace('name = "Geophone', 'name = "Copied geophone', 1), encoding="utf-8")
    proc = subprocess.run([sys.executable, "-c", WHICH_INSTALL], capture_output=True, text=True,
                          cwd=tree, timeout=120)
    assert proc.returncode == 0, proc.stderr
    seen = json.loads(proc.stdout)
    assert seen["kind"] == "source tree" and pathlib.Path(seen["package"]) == tree / "tui", seen
    assert pathlib.Path(seen["demo"]) == demo
    assert _read_demo_name(seen["demo"]).startswith("Copied geophone")
    # And the program itself opens it with no file given (launch.make_app, as
    # `python -m tui` with no argument does, without starting the screen).
    code = "from tui.launch import make_app; print(make_app(None).design.name)"
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tree,
                          timeout=120)
    assert proc.returncode == 0 and proc.stdout.startswith("Copied geophone"), proc.stderr
