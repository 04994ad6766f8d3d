"""`stageledger response FILE [--csv] [--per-decade N]` and the response keys
of `stageledger report FILE --json`.

Where each expected value comes from, named again beside its check:
* the engine's own sweep of the same design (``model.analyses.corner_search.sweep``,
  rebuilt from scratch as tests/test_response.py's ``_at`` does): this checks
  the command's plumbing and formatting, not the engine, whose values are
  checked against closed forms and a textbook in tests/test_response.py;
* closed forms: a log grid of N points a decade has neighbours in the ratio
  10**(1/N); 20·log10|A| for a gain in dB; the hybrid-π
  fT = gm/(2π(Cπ + Cμ)), so Cπ = gm/(2π·fT) − Cμ (Gray, Hurst, Lewis &
  Meyer); f = 1/(2πτ) for a time constant; the sum of short-circuit corners
  and 1/(2πΣτ) as the README defines f_low_estimate and f_high_estimate;
* consistency of the tool with itself: its JSON against its own text or CSV
  (said so beside each such check).
"""

from __future__ import annotations

import json
import math
import pathlib
import re
import subprocess
import sys
import tomllib

import numpy as np
import pytest

from model import read_design
from model.analyses.capacitance import device_capacitance, with_device_capacitance
from model.analyses.corner_search import sweep
from model.analyses.figures import design_values
from model.analyses.midband import device_small_signal
from model.circuit.newton import operating_point
from model.circuit.topologies import build
from model.design.units import parse_value
from tui.cli import main

ROOT = pathlib.Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "saved_designs").glob("*.toml"))
GEOPHONE = ROOT / "saved_designs" / "geophone_preamp.toml"
CABLE = ROOT / "saved_designs" / "cable_driver.toml"

#: The keys the README's Figures and Frequency response sections add to the JSON.
RESPONSE_KEYS = ("f_low", "f_high", "bandwidth", "gain_at_freq", "phase_at_freq", "c_pi",
                 "gain_at_freq_db", "f_low_by", "f_high_by", "f_low_parts", "f_high_parts",
                 "f_low_estimate", "f_high_estimate", "f_high_miller")
#: How the README says the device capacitances are shown in text.
SHOWN = {"cpi": "Cπ", "cmu": "Cμ"}


# ------------------------------------------------------------------ helpers
def call(capsys, *argv):
    """(exit status, stdout, stderr) of ``main(argv)``; argparse's own errors
    leave by SystemExit, which is what the installed script's status is."""
    try:
        code = main(list(argv))
    except SystemExit as exc:
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def _no_constants(name):
    raise AssertionError(f"JSON holds {name}, which is not JSON")


def report_json(capsys, path) -> dict:
    code, out, err = call(capsys, "report", str(path), "--json")
    assert code == 0, err
    return json.loads(out, parse_constant=_no_constants)


def csv_rows(capsys, path, *extra):
    code, out, err = call(capsys, "response", str(path), "--csv", *extra)
    assert code == 0, err
    lines = out.splitlines()
    rows = np.array([[float(x) for x in line.split(",")] for line in lines[1:]])
    return lines[0], rows


def _at(design, freq):
    """av_source of ``design`` at ``freq`` (Hz) from a fresh build, as in
    tests/test_response.py: the engine itself, to check the command's plumbing."""
    stage = build(design.topology, design_values([design]))
    op = operating_point(stage.net)
    gm = float(device_small_signal(op).gm[0])
    caps = device_capacitance(gm, design.transistor.ft, design.transistor.cmu)
    return sweep(with_device_capacitance(stage, caps), op, np.asarray(freq, dtype=float))


def edited(tmp_path, demo, name, **values):
    """A copy of ``demo`` with each ``key = ...`` line replaced; each key must
    occur on exactly one line, so a reshaped demo fails loudly here."""
    text = demo.read_text(encoding="utf-8")
    for key, value in values.items():
        text, n = re.subn(rf"(?m)^{key} = .*$", f"{key} = {value}", text)
        assert n == 1, key
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _wrap(deg):
    """An angle difference folded into [−180°, 180°)."""
    return (np.asarray(deg) + 180.0) % 360.0 - 180.0


# ------------------------------------------------------------------ --csv
@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
@pytest.mark.parametrize("per_decade", [None, 5, 1], ids=["default", "5", "1"])
def test_csv_is_a_log_grid_over_whole_decades_bracketing_the_corners(demo, per_decade, capsys):
    extra = () if per_decade is None else ("--per-decade", str(per_decade))
    n = 20 if per_decade is None else per_decade  # README: 20 points a decade unless N
    header, rows = csv_rows(capsys, demo, *extra)
    assert header == "freq_hz,gain_db,phase_deg,noise_in_v_rthz"
    f = rows[:, 0]
    assert np.all(np.diff(f) > 0)
    # Log spacing, closed form: neighbours of an N-a-decade grid differ by 10**(1/N).
    np.testing.assert_allclose(f[1:] / f[:-1], 10.0 ** (1.0 / n), rtol=1e-4)
    # Whole decades: both ends are powers of ten, and N points per decade
    # plus the closing point.
    lo, hi = math.log10(f[0]), math.log10(f[-1])
    assert lo == pytest.approx(round(lo), abs=1e-6) and hi == pytest.approx(round(hi), abs=1e-6)
    assert len(f) == round(hi - lo) * n + 1
    data = report_json(capsys, demo)  # the tool's JSON against its own CSV
    assert f[0] < data["f_low"] < data["f_high"] < f[-1]


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_csv_gain_and_phase_are_the_engines_sweep(demo, capsys):
    _, rows = csv_rows(capsys, demo)
    g = _at(read_design(demo), rows[:, 0])
    # Gain in dB, closed form 20·log10|A|, to 1e-3 dB (the CSV keeps 6 figures).
    np.testing.assert_allclose(rows[:, 1], 20.0 * np.log10(np.abs(g)), rtol=0, atol=1e-3)
    # Phase: the CSV may choose any branch, but modulo 360° it is arg A.
    np.testing.assert_allclose(_wrap(rows[:, 2] - np.degrees(np.angle(g))), 0.0, atol=1e-2)
    # README: continuous along the sweep.
    assert np.max(np.abs(np.diff(rows[:, 2]))) < 90.0


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_sweep_reaches_a_decade_beyond_each_corner(demo, capsys):
    """README: the sweep runs 'over whole decades from one below f_low to one
    above f_high'."""
    _, rows = csv_rows(capsys, demo)
    data = report_json(capsys, demo)
    assert rows[0, 0] <= data["f_low"] / 10.0 * (1 + 1e-9)
    assert rows[-1, 0] >= data["f_high"] * 10.0 * (1 - 1e-9)


@pytest.mark.parametrize("demo, values", [
    # A longer cable run, about 15 nF: f_high ≈ 1.16 MHz, its estimate ≈ 0.89 MHz.
    (CABLE, {"cl": "15e-9"}),
    # A smaller bypass capacitor: f_low ≈ 9.65 Hz, its estimate ≈ 10.3 Hz.
    (GEOPHONE, {"ce": "91e-6"}),
], ids=["cable-15nF", "geophone-ce-91u"])
def test_sweep_reaches_a_decade_beyond_a_corner_near_a_decade_boundary(demo, values, tmp_path, capsys):
    path = edited(tmp_path, demo, "edge.toml", **values)
    _, rows = csv_rows(capsys, path)
    data = report_json(capsys, path)
    assert rows[0, 0] <= data["f_low"] / 10.0 * (1 + 1e-9)
    assert rows[-1, 0] >= data["f_high"] * 10.0 * (1 - 1e-9)


# ------------------------------------------------------------------ text
def _no_cl(tmp_path):
    """The geophone preamp with no load capacitance: only Cπ and Cμ remain
    for the upper corner, so the Cπ/Cμ spelling is exercised."""
    return edited(tmp_path, GEOPHONE, "no_cl.toml", cl="0.0")


CASES = [*[(p.name, lambda tmp, p=p: p) for p in DEMOS], ("geophone-no-cl", _no_cl)]


@pytest.mark.parametrize("name, make", CASES, ids=[c[0] for c in CASES])
def test_text_fits_80_columns(name, make, tmp_path, capsys):
    path = make(tmp_path)
    for argv in (("response", str(path)), ("response", str(path), "--per-decade", "3"),
                 ("report", str(path))):
        code, out, err = call(capsys, *argv)
        assert code == 0, err
        assert max(len(line) for line in out.splitlines()) <= 80, argv


@pytest.mark.parametrize("name, make", CASES, ids=[c[0] for c in CASES])
def test_text_names_the_part_setting_each_corner(name, make, tmp_path, capsys):
    path = make(tmp_path)
    data = report_json(capsys, path)
    code, out, err = call(capsys, "response", str(path))
    assert code == 0, err
    sentence = re.compile(r"^  (f_low|f_high) (.+?), set by (\S+) \((.+?) alone\)$", re.M)
    found = {m[0]: m[1:] for m in sentence.findall(out)}
    assert set(found) == {"f_low", "f_high"}, out
    for corner in ("f_low", "f_high"):
        value, part, alone = found[corner]
        by = data[corner + "_by"]
        # The tool's text against its own JSON: the same part, spelt as the README says...
        assert part == SHOWN.get(by, by)
        # ...and the same numbers, to the 3 figures the text shows.
        assert parse_value(value, "Hz") == pytest.approx(data[corner], rel=5.1e-3)
        assert parse_value(alone, "Hz") == pytest.approx(data[corner + "_parts"][by], rel=5.1e-3)
    if name == "geophone-no-cl":
        assert data["f_high_by"] in SHOWN and SHOWN[data["f_high_by"]] in found["f_high"][1]


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_text_table_matches_the_csv(demo, capsys):
    """The tool's text table against its own CSV: one row per sweep point,
    gains equal to the 2 decimals the table shows."""
    _, rows = csv_rows(capsys, demo)
    code, out, err = call(capsys, "response", str(demo))
    assert code == 0, err
    table = re.findall(r"^\s+\S+ \S*Hz\s+(-?[\d.]+) dB\s+(-?[\d.]+)°$", out, re.M)
    assert len(table) == len(rows)
    np.testing.assert_allclose([float(g) for g, _ in table], rows[:, 1], atol=0.0051)
    np.testing.assert_allclose([float(p) for _, p in table], rows[:, 2], atol=0.051)


# ------------------------------------------------------------------ JSON
@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_json_response_keys_are_present_and_consistent(demo, capsys):
    data = report_json(capsys, demo)  # parse_constant rejects NaN and Infinity
    missing = [k for k in RESPONSE_KEYS if k not in data]
    assert not missing
    for key in ("f_low", "f_high", "bandwidth", "gain_at_freq", "f_low_estimate",
                "f_high_estimate", "f_high_miller"):
        assert isinstance(data[key], float) and data[key] > 0, key
    assert data["bandwidth"] == pytest.approx(data["f_high"] - data["f_low"], rel=1e-12)
    # Gain in dB, closed form 20·log10|A|.
    assert data["gain_at_freq_db"] == pytest.approx(20.0 * math.log10(data["gain_at_freq"]), abs=1e-9)
    # README: the part named for f_low has the highest corner alone; for
    # f_high the largest time constant, i.e. the lowest 1/(2πτ).
    assert data["f_low_by"] == max(data["f_low_parts"], key=data["f_low_parts"].get)
    assert data["f_high_by"] == min(data["f_high_parts"], key=data["f_high_parts"].get)
    # README's estimates: the sum of the short-circuit corners, and 1/(2πΣτ)
    # with τ = 1/(2πf) for each open-circuit part, i.e. 1/Σ(1/f).
    assert data["f_low_estimate"] == pytest.approx(sum(data["f_low_parts"].values()), rel=1e-12)
    assert data["f_high_estimate"] == pytest.approx(
        1.0 / sum(1.0 / f for f in data["f_high_parts"].values()), rel=1e-12)


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_json_c_pi_follows_the_hybrid_pi_ft(demo, capsys):
    """Cπ = gm/(2π·fT) − Cμ (Gray, Hurst, Lewis & Meyer: fT = gm/(2π(Cπ + Cμ))),
    with fT and Cμ read from the design file and gm from the JSON."""
    t = tomllib.loads(demo.read_text(encoding="utf-8"))["transistor"]
    data = report_json(capsys, demo)
    total = data["gm"] / (2.0 * math.pi * float(t["ft"]))
    assert total > float(t["cmu"])  # the demos are not floored
    assert data["c_pi"] == pytest.approx(total - float(t["cmu"]), rel=1e-9, abs=0)
    assert "FT-INCONSISTENT" not in {w["code"] for w in data["warnings"]}


@pytest.mark.parametrize("demo", DEMOS, ids=lambda p: p.name)
def test_json_gain_and_phase_at_the_signal_frequency_are_the_engines(demo, capsys):
    d = read_design(demo)
    data = report_json(capsys, demo)
    g = complex(_at(d, [d.source.freq])[0])  # the engine at source.freq
    assert data["gain_at_freq"] == pytest.approx(abs(g), rel=1e-9)
    assert float(_wrap(data["phase_at_freq"] - math.degrees(math.atan2(g.imag, g.real)))) == \
        pytest.approx(0.0, abs=1e-6)
    # README's branch: near 180° for an inverting stage, near 0° for a
    # non-inverting one; every demo's signal lies well inside the band.
    assert data["f_low"] < d.source.freq < data["f_high"]
    target = 180.0 if data["av_source"] < 0 else 0.0
    assert abs(data["phase_at_freq"] - target) < 90.0


# ------------------------------------------------------------------ bad input
BAD = [
    ("per-decade-0", lambda tmp: GEOPHONE, ("--per-decade", "0"), ("--per-decade", "0")),
    ("per-decade-1001", lambda tmp: GEOPHONE, ("--per-decade", "1001"), ("--per-decade", "1001")),
    ("per-decade-abc", lambda tmp: GEOPHONE, ("--per-decade", "abc"), ("--per-decade", "abc")),
    ("missing", lambda tmp: tmp / "absent.toml", (), ("absent.toml",)),
    ("ft-negative", lambda tmp: edited(tmp, GEOPHONE, "bad_ft.toml", ft="-1"), ("--csv",),
     ("bad_ft.toml", "transistor.ft", "-1")),
    ("directory", lambda tmp: (tmp / "folder.toml").mkdir() or tmp / "folder.toml", (),
     ("folder.toml", "directory")),
]


@pytest.mark.parametrize("name, make, extra, named", BAD, ids=[b[0] for b in BAD])
def test_bad_input_exits_2_with_one_line_and_touches_nothing(name, make, extra, named, tmp_path, capsys):
    path = make(tmp_path)
    before = path.read_bytes() if path.is_file() else None
    listing = sorted(p.name for p in tmp_path.rglob("*"))
    code, out, err = call(capsys, "response", str(path), *extra)
    assert code == 2
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for word in named:
        assert word in lines[0], (word, lines[0])
    if before is not None:
        assert path.read_bytes() == before
    # A read-only command leaves no lock, temporary or new file behind.
    assert sorted(p.name for p in tmp_path.rglob("*")) == listing


@pytest.mark.parametrize("argv", [("--per-decade", "abc"), ("--per-decade", "0")], ids=["abc", "0"])
def test_bad_per_decade_from_the_real_command(argv):
    """The same as an installed user sees it: a process with status 2."""
    proc = subprocess.run([sys.executable, "-m", "tui", "response", str(GEOPHONE), *argv],
                          capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert proc.returncode == 2 and proc.stdout == ""
    assert len(proc.stderr.splitlines()) == 1 and "Traceback" not in proc.stderr


# ------------------------------------------------------------------ FT-INCONSISTENT
def _fast_ft(tmp_path):
    """fT far beyond what gm and Cμ allow: gm/(2π·1 THz) is femtofarads,
    far below Cμ = 10 pF, for any gm a 9 V small-signal stage has."""
    return edited(tmp_path, GEOPHONE, "fast_ft.toml", ft="1e12", cmu="10e-12")


def test_inconsistent_ft_is_warned_and_floors_c_pi(tmp_path, capsys):
    path = _fast_ft(tmp_path)
    data = report_json(capsys, path)
    # README Warnings: FT-INCONSISTENT when gm/(2π·ft) < cmu; the premise, from
    # the JSON gm and the file's values:
    assert data["gm"] / (2.0 * math.pi * 1e12) < 10e-12
    assert data["c_pi"] == 0
    assert "FT-INCONSISTENT" in {w["code"] for w in data["warnings"]}
    code, out, err = call(capsys, "report", str(path))
    assert code == 0, err
    assert "FT-INCONSISTENT" in out
    code, out, err = call(capsys, "response", str(path))
    assert code == 0, err
    assert "Cπ floored at 0" in out


def test_report_with_inconsistent_ft_fits_80_columns(tmp_path, capsys, monkeypatch):
    # A relative name: the "file:" line echoes the path given, however long.
    monkeypatch.chdir(tmp_path)
    code, out, err = call(capsys, "report", _fast_ft(tmp_path).name)
    assert code == 0, err
    assert max(len(line) for line in out.splitlines()) <= 80
