"""Sweeps: the maximum power transfer law in the exact and the linear view, and the CLI."""

import json

import numpy as np
import pytest

from pvsource.config import load_system
from pvsource.errors import InputError
from pvsource.sweep import run_sweep
from pvsource.system import Load

from conftest import DATA, make_system, run_cli

CABIN = str(DATA / "example-cabin-mppt.toml")
EXAMPLE = str(DATA / "example-system.toml")


def test_linear_model_peaks_at_m_equal_one_with_half_efficiency(demo_module):
    # Law (maximum power transfer theorem): a linear source delivers most at
    # m = 1, at 50 % efficiency.
    system = make_system(demo_module, groups=((1, 3),), load=Load("resistor", resistance_ohm=1.0))
    rows, design = run_sweep(system, "load-resistance", "0.01", "100", 400, 800.0, 45.0)
    m = rows["matching_ratio"].to_numpy()
    k = rows["linear_p_w"].idxmax()
    # The sampled point nearest m = 1 carries the maximum, at about half efficiency.
    assert k == int(np.argmin(np.abs(np.log(m))))
    assert rows["linear_efficiency"][k] == pytest.approx(m[k] / (1 + m[k]), rel=1e-12)
    assert rows["linear_efficiency"][k] == pytest.approx(0.5, abs=0.03)
    assert rows["linear_p_w"].max() <= design["e_v"] ** 2 / (4 * design["r_ohm"]) * (1 + 1e-12)


def test_exact_sweep_peaks_at_m_equal_one_at_the_arrays_mpp(demo_module):
    # Law: with no cables the delivered power peaks where the resistor matches
    # the array's dynamic resistance, at the array's own maximum power.
    system = make_system(demo_module, groups=((2, 2),), load=Load("resistor", resistance_ohm=5.0))
    rows, design = run_sweep(system, "load-resistance", "0.5", "50", 600, 900.0, 35.0)
    k = rows["delivered_w"].idxmax()
    assert rows["matching_ratio"][k] == pytest.approx(1.0, rel=0.03)
    assert rows["delivered_w"][k] == pytest.approx(design["source_p_mp"], rel=1e-3)
    assert rows["delivered_w"].max() <= design["source_p_mp"] * (1 + 1e-9)


def test_bank_class_keeps_the_stored_energy():
    system = load_system(CABIN)
    rows, _ = run_sweep(system, "bank-class", "12", "48", 3)
    assert list(rows["value"]) == [12.0, 24.0, 48.0]
    assert rows["charge_current_a"].iloc[0] > rows["charge_current_a"].iloc[2]  # same power, lower voltage


def test_modules_and_sizes_step_along_their_series():
    system = load_system(CABIN)
    rows, _ = run_sweep(system, "modules", "2", "4", 10)
    assert list(rows["value"]) == [2, 3, 4]
    rows, _ = run_sweep(system, "size:array to controller", "4 mm2", "16 mm2", 10)
    assert list(rows["value"]) == ["4 mm2", "6 mm2", "10 mm2", "16 mm2"]
    assert rows["generated_w"].is_monotonic_increasing or rows["delivered_w"].is_monotonic_increasing


def test_soc_sweep_tapers_into_float():
    rows, _ = run_sweep(load_system(CABIN), "soc", "0.0", "1.0", 11)
    assert rows["charge_current_a"].iloc[0] > 0
    assert rows["charge_current_a"].iloc[-1] <= rows["charge_current_a"].iloc[0]


@pytest.mark.parametrize("variable, start, stop, steps, match", [
    ("wind", "0", "1", 5, "expected one of"),
    ("soc", "0", "1", 5, "needs a system with a \\[bank\\]"),
    ("irradiance", "0", "5000", 5, "--to"),
    ("irradiance", "lots", "100", 5, "--from"),
    ("irradiance", "0", "100", 1, "--steps"),
    ("size:nowhere", "6 mm2", "10 mm2", 5, "no cable run"),
])
def test_bad_sweeps(variable, start, stop, steps, match):
    with pytest.raises(InputError, match=match):
        run_sweep(load_system(EXAMPLE), variable, start, stop, steps)


run = run_cli


def test_cli_sweep_json_and_plot(capsys, tmp_path):
    png = tmp_path / "sweep.png"
    code, out, err = run(capsys, "sweep", EXAMPLE, "--over", "bank-voltage", "--from", "22", "--to", "34",
                         "--steps", "7", "--plot", str(png), "--json")
    assert code == 0 and err == ""
    rec = json.loads(out)
    assert len(rec["rows"]) == 7
    for key in ("value", "delivered_w", "efficiency", "matching_ratio", "charge_current_a"):
        assert key in rec["rows"][0]
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(tmp_path.glob(".sweep.*"))  # no temporary file left behind
    code, out, _ = run(capsys, "sweep", CABIN, "--over", "soc", "--from", "0", "--to", "1", "--steps", "3")
    assert code == 0 and "most delivered" in out and "Cautions" in out


@pytest.mark.parametrize("args, words", [
    (["sweep", EXAMPLE, "--over", "soc", "--from", "0", "--to", "1"], "soc needs"),
    (["sweep", EXAMPLE, "--over", "irradiance", "--from", "x", "--to", "1"], "--from"),
    (["sweep", EXAMPLE, "--over", "irradiance", "--from", "0", "--to", "1", "--plot", "out.jpg"], "--plot"),
    (["sweep", EXAMPLE, "--over", "irradiance", "--from", "0", "--to", "1", "--plot", "/nonexistent/x.png"],
     "--plot"),
    (["sweep", EXAMPLE, "--from", "0", "--to", "1"], "--over"),
])
def test_cli_sweep_errors_are_one_line(capsys, args, words):
    code, out, err = run(capsys, *args)
    assert code == 2 and out == "" and err.count("\n") == 1 and words in err
