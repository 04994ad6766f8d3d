"""The sensitivity matrix (model/advisor/sensitivity.py) against closed
forms, the central difference's O(h²) convergence, undefined cells, and
`stageledger sensitivity` on the command line."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from model.advisor.sensitivity import (
    AMBIENT,
    COLUMNS,
    DB_PER_PERCENT,
    SKIPPED,
    YIELD,
    knob_rows,
    sensitivity_matrix,
)
from model.design.stage import default_design, with_values
from model.files import plain_json
from model.files.designfile import dumps_design, read_design
from tui.cli import main

DEMO = "saved_designs/geophone_preamp.toml"


def test_loaded_gain_moves_with_rc_as_rl_over_rc_plus_rl():
    """A common-emitter stage with re2 bypassed and re1 left in: Sedra &
    Smith, Microelectronic Circuits, the CE amplifier with an emitter
    resistance, Av = −α(RC‖RL)/(re + Re), so with the operating point (re)
    fixed by the divider and ro out of the way (VA = 1e6 V),
    ∂ln|av|/∂ln RC = ∂ln(RC‖RL)/∂ln RC = RL/(RC + RL); and the output
    resistance is RC (same source), so ∂ln rout/∂ln RC = 1."""
    design = with_values(default_design(), {"transistor.va": 1e6})
    assert design.stage.ce > 0 and design.stage.re1 > 0  # bypassed re2, unbypassed re1
    rc, rl = design.stage.rc, design.load.rl
    row = sensitivity_matrix(design).rows["stage.rc"]
    assert row["av_loaded"] / DB_PER_PERCENT == pytest.approx(rl / (rc + rl), rel=1e-5)
    assert row["rout"] == pytest.approx(1.0, rel=1e-5)


def test_the_divider_moves_the_base_as_its_thevenin_voltage():
    """Voltage divider (Horowitz & Hill, The Art of Electronics, the
    voltage divider): VB = VCC·R2/(R1 + R2) when the base draws no current
    (β = 1e9), so ∂ln VB/∂ln R2 = R1/(R1 + R2), ∂ln VB/∂ln R1 = −R1/(R1 + R2)
    and ∂ln VB/∂ln VCC = 1."""
    design = with_values(default_design(), {"transistor.beta": 1e9})
    r1, r2 = design.bias.r1, design.bias.r2
    rows = sensitivity_matrix(design, columns=("vb",)).rows
    assert rows["bias.r2"]["vb"] == pytest.approx(r1 / (r1 + r2), rel=1e-6)
    assert rows["bias.r1"]["vb"] == pytest.approx(-r1 / (r1 + r2), rel=1e-6)
    assert rows["supply.vcc"]["vb"] == pytest.approx(1.0, rel=1e-6)


def _cells(design, step):
    sens = sensitivity_matrix(design, step=step)
    return np.array([[sens.rows[k][c] for c in COLUMNS] for k in sens.knobs])


def test_the_central_difference_converges_as_h_squared():
    """Central differences: error C·h² (Taylor; e.g. Press et al., Numerical
    Recipes, numerical derivatives), so against a reference at h = 1e-4 the
    error at 1e-2 is (1e-2/3e-3)² ≈ 11 times the error at 3e-3 (a one-sided
    difference, O(h), would give 3.3); and at h = 1e-3 the matrix agrees
    with h = 1e-4 to well within the two places the table prints."""
    design = read_design(DEMO)
    ref, mid, coarse = _cells(design, 1e-4), _cells(design, 3e-3), _cells(design, 1e-2)
    assert np.array_equal(np.isfinite(ref), np.isfinite(coarse))
    ok = np.isfinite(ref)
    err_coarse, err_mid = np.abs(coarse - ref)[ok], np.abs(mid - ref)[ok]
    worst = int(np.argmax(err_coarse))
    assert err_coarse[worst] > 1e-5  # a cell that curves, so the ratio means something
    assert 7.0 < err_coarse[worst] / err_mid[worst] < 16.0
    np.testing.assert_allclose(_cells(design, 1e-3)[ok], ref[ok], atol=2e-5)


def test_rows_are_the_engine_knobs_that_are_fitted():
    design = with_values(default_design(), {"stage.ce": "none", "stage.cin": "none", "stage.cout": "none",
                                            "load.rl": "open"})
    rows = knob_rows(design)
    for key in ("stage.ce", "stage.cin", "stage.cout", "load.rl", "load.cl", *SKIPPED):
        assert key not in rows
    assert AMBIENT in rows and "stage.rc" in rows and "transistor.beta" in rows
    sens = sensitivity_matrix(design)
    # Flat to DC (no capacitor fitted): f_low is 0 on both sides, so undefined.
    assert all(math.isnan(v["f_low"]) for v in sens.rows.values())


def test_a_knob_that_leaves_active_gives_undefined_cells_not_a_crash():
    # VCE is about 0.84 V; rc +20 % saturates the stage (VCE = IC·ΔRC, Ohm's law).
    design = with_values(default_design(), {"stage.rc": 13e3})
    sens = sensitivity_matrix(design, step=0.2)
    assert all(math.isnan(v) for v in sens.rows["stage.rc"].values())
    assert any(math.isfinite(v) for row in sens.rows.values() for v in row.values())
    assert all(v is None for v in _strict(plain_json.dumps(sens.to_dict()))["rows"]["stage.rc"].values())


def test_the_ambient_row_is_per_kelvin():
    """IC of a divider-biased stage rises with temperature as VBE falls by
    about 2 mV/K (common practice; Sedra & Smith give −2 mV/°C): with
    VE = VB − VBE, ΔIC/IC ≈ 2 mV/K / VE, positive and well under 1 %/K."""
    design = default_design()
    ve = 0.7  # from memory: a silicon VBE, to bound VE from the divider's VB
    vb = design.supply.vcc * design.bias.r2 / (design.bias.r1 + design.bias.r2)
    expected = 100 * 2e-3 / (vb - ve)  # % per K
    got = sensitivity_matrix(design).rows[AMBIENT]["ic"]
    assert 0.5 * expected < got < 1.5 * expected


def _strict(text):
    return json.loads(text, parse_constant=lambda c: pytest.fail(f"non-finite {c}"))


def test_cli_json_is_strict_and_names_method_step_columns_rows(capsys):
    assert main(["sensitivity", DEMO, "--json"]) == 0
    data = _strict(capsys.readouterr().out)
    assert data["method"] == "central differences" and data["step"] == 1e-3
    assert data["columns"] == list(COLUMNS)
    assert set(data["rows"]) == set(knob_rows(read_design(DEMO)))
    assert all(set(row) == set(COLUMNS) for row in data["rows"].values())


def test_cli_text_fits_80_columns(capsys):
    assert main(["sensitivity", DEMO]) == 0
    out = capsys.readouterr().out
    assert "central differences, ±h" in out and "knob" in out and "av dB" in out
    assert max(len(line) for line in out.splitlines() if DEMO not in line) <= 80
    assert len([line for line in out.splitlines() if line.startswith(("rc ", "re1 ", "ambient"))]) == 3


def test_cli_yield_column(tmp_path, capsys):
    # DC and midband specs only, so the yield needs no sweeps and stays quick.
    design = with_values(default_design(), {"tolerance.resistors": 0.05, "spec.av_loaded": "-40..-25",
                                            "spec.ic": "0.5m..none"})
    path = tmp_path / "y.toml"
    path.write_text(dumps_design(design), encoding="utf-8")
    assert main(["sensitivity", str(path), "--json", "--yield"]) == 0
    data = _strict(capsys.readouterr().out)
    assert data["columns"][-1] == YIELD and data["yield_step"] == 0.01
    # The source amplitude moves no DC or midband figure: the same builds
    # pass on both sides (common random numbers), so exactly no change.
    assert data["rows"]["source.vpk"][YIELD] == 0
    assert any(abs(row[YIELD]) > 0 for row in data["rows"].values())
    assert main(["sensitivity", str(path), "--yield"]) == 0
    out = capsys.readouterr().out
    assert "yield" in out and max(len(line) for line in out.splitlines() if str(path) not in line) <= 80


def test_cli_bad_file_is_one_line_and_status_2(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(dumps_design(default_design()).replace("rc = 6800.0", "rc = -5.0"), encoding="utf-8")
    assert "rc = -5.0" in path.read_text(encoding="utf-8")
    assert main(["sensitivity", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "stage.rc" in err and "Traceback" not in err


def test_movers_rank_by_magnitude_and_leave_the_per_kelvin_row_out():
    sens = sensitivity_matrix(read_design(DEMO))
    movers = sens.movers("av_loaded", 5)
    sizes = [abs(v) for _, v in movers]
    assert len(movers) == 5 and sizes == sorted(sizes, reverse=True)
    assert AMBIENT not in dict(movers)
    others = [abs(r["av_loaded"]) for k, r in sens.rows.items() if k not in dict(movers) and k != AMBIENT]
    assert max(others) <= sizes[-1]
