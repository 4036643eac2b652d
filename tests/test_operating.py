"""The operating-point pipeline: laws that must hold on every solve, and the API."""

import numpy as np
import pandas as pd
import pytest

import pvsource
import reference as ref
from pvsource import network as nw
from pvsource.errors import ConvergenceError, InputError
from pvsource.operating import operating_points, point_record
from pvsource.system import Load

from conftest import DATA, cable, make_system

LOADS = [Load("mpp"), Load("resistor", resistance_ohm=6.0), Load("voltage", emf_v=70.0),
         Load("battery", emf_v=52.0, resistance_ohm=0.04)]


def _two_group_system(module, load):
    cables = (cable("string", 4.0, 8.0, "g1"), cable("home-run", 9.0, 5.09, "g1"),
              cable("home-run", 15.0, 5.09, "g2"), cable("feeder", 12.0, 1.95))
    return make_system(module, groups=((2, 3), (2, 2)), cables=cables, load=load)


@pytest.mark.parametrize("load", LOADS, ids=lambda l: l.kind)
def test_kvl_kcl_and_energy_balance_hold_on_every_solve(any_module, rng, load):
    # Laws: Kirchhoff's voltage and current laws and conservation of energy
    # (generated = every cable loss + delivered) to 1e-9 relative.
    system = _two_group_system(any_module, load)
    n = 400
    df = operating_points(system, rng.uniform(0, 1300, (n, 2)), rng.uniform(-30, 85, (n, 2)))
    assert df["converged"].all()
    assert np.abs(df["energy_balance_residual"]).max() <= 1e-9
    scale_v = np.maximum(np.abs(df["v"]), 1.0)
    assert (df["kvl_residual_v"] / scale_v).max() <= 1e-9
    assert (df["kcl_residual_a"] / np.maximum(np.abs(df["i"]), 1.0)).max() <= 1e-9
    lhs = df["generated_w"]
    rhs = df["string_loss_w"] + df["home_run_loss_w"] + df["feeder_loss_w"] + df["delivered_w"]
    np.testing.assert_allclose(lhs, rhs, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(df["cable_loss_w"], lhs - df["delivered_w"], rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("load", LOADS, ids=lambda l: l.kind)
def test_superposition_shares_sum_to_the_solved_current(demo_module, rng, load):
    system = _two_group_system(demo_module, load)
    df = operating_points(system, rng.uniform(50, 1200, (200, 2)), rng.uniform(-10, 70, (200, 2)))
    shares = df["share_g1_a"] + df["share_g2_a"] + df["share_load_emf_a"]
    np.testing.assert_allclose(shares, df["superposition_total_a"], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(df["superposition_total_a"], df["i"], rtol=1e-9, atol=1e-9)


def test_maximum_power_transfer_condition_at_the_mpp(any_module, rng):
    # Law: at the maximum power point dP/dV = 0, so R_th = V / I (m = 1).
    system = make_system(any_module, groups=((3, 2), (3, 1)), load=Load("mpp"))
    df = operating_points(system, rng.uniform(30, 1200, (300, 2)), rng.uniform(-20, 75, (300, 2)))
    np.testing.assert_allclose(df["thevenin_r_ohm"], df["v"] / df["i"], rtol=1e-6)
    np.testing.assert_allclose(df["matching_ratio"], 1.0, rtol=1e-6)
    np.testing.assert_allclose(df["p"], df["source_p_mp"], rtol=1e-10)
    # With no cables all that is left on the curves is the cost of paralleling.
    np.testing.assert_allclose(df["mpp_shortfall_w"], df["parallel_mismatch_w"], atol=1e-9 * df["p"].max())
    assert (df["parallel_mismatch_w"] >= -1e-9 * df["p"]).all()


def test_shortfall_is_never_negative_even_when_cables_decouple_groups(demo_module, rng):
    # Each group generates at most its own maximum power, however it is wired.
    long_run = cable("home-run", 1000.0, 3.6, "g1")
    system = make_system(demo_module, groups=((10, 1), (8, 1)), cables=(long_run,), load=Load("mpp"))
    df = operating_points(system, rng.uniform(200, 1100, (100, 2)), rng.uniform(0, 60, (100, 2)))
    assert (df["mpp_shortfall_w"] >= -1e-9 * df["groups_p_mp_w"]).all()
    assert (df["generated_w"] > df["source_p_mp"]).any()  # the decoupled groups beat direct paralleling


def test_a_tracker_behind_a_feeder_sees_m_equal_one_at_its_terminals(demo_module, rng):
    # Law: the tracker maximises its own input power, so the array plus
    # feeder, as seen from the load, is matched (m = 1) there.
    system = _two_group_system(demo_module, Load("mpp"))
    df = operating_points(system, rng.uniform(100, 1200, (200, 2)), rng.uniform(-20, 75, (200, 2)))
    np.testing.assert_allclose(df["load_side_matching_ratio"], 1.0, rtol=1e-6)
    assert (df["matching_ratio"] > 1.0).all()  # the array itself sits above its own V_mp


def test_linearisation_is_the_tangent_of_pvlibs_curve(any_module):
    # Reference: the array's I-V curve from pvlib's i_from_v (tests/reference.py):
    # R_th = -dV/dI there by central difference, and the exact currents at
    # +/- 10 % of the bus voltage.
    system = make_system(any_module, groups=((1, 3),), cables=(cable("feeder", 12, 3.4),),
                         load=Load("battery", emf_v=26.4, resistance_ohm=0.03))
    r = operating_points(system, 800.0, 45.0).iloc[0]
    groups = [ref.group(ref.diode_at(any_module.parameters, 800.0, 45.0), 1, 3)]
    assert r["i"] == pytest.approx(ref.array_current(groups, r["v"]), rel=1e-9)
    r_tangent = 1.0 / ref.conductance(groups, r["v"])
    assert r["thevenin_r_ohm"] == pytest.approx(r_tangent, rel=1e-6)
    # Law (Thevenin's and Norton's theorems): the tangent crosses I = 0 at E_th
    # and V = 0 at I_N, here worked out from pvlib's slope.
    assert r["thevenin_e_v"] == pytest.approx(r["v"] + r["i"] * r_tangent, rel=1e-6)
    assert r["norton_i_a"] == pytest.approx(r["i"] + r["v"] / r_tangent, rel=1e-6)
    rec = point_record(system, r)["linear_drift"]
    for tag, factor in (("low", 0.9), ("high", 1.1)):
        v_d = factor * r["v"]
        exact = ref.array_current(groups, v_d)
        tangent = r["i"] - (v_d - r["v"]) / r_tangent
        assert rec[tag]["v"] == pytest.approx(v_d, rel=1e-12)
        assert rec[tag]["i_exact_a"] == pytest.approx(exact, rel=1e-7)
        assert rec[tag]["i_linear_a"] == pytest.approx(tangent, rel=1e-6)
        # Law: a concave curve lies below its tangent, so the linear model over-predicts on both sides.
        assert tangent > exact


def test_source_key_points_match_pvlib_for_a_single_group(any_module, rng):
    # Reference: pvlib.pvsystem.calcparams_cec (with the six-parameter
    # module's adjustment) and singlediode (lambertw), scaled by 3 in series
    # and 2 in parallel (tests/reference.py).
    system = make_system(any_module, groups=((3, 2),), cables=(cable("feeder", 20, 3.4),),
                         load=Load("battery", emf_v=80.0, resistance_ohm=0.05))
    g, t = rng.uniform(10, 1200, 100), rng.uniform(-20, 80, 100)
    df = operating_points(system, g, t)
    points = ref.key_points(ref.diode_at(any_module.parameters, g, t), 3, 2)
    np.testing.assert_allclose(df["source_v_oc"], points["v_oc"], rtol=1e-9)
    np.testing.assert_allclose(df["source_i_sc"], points["i_sc"], rtol=1e-9)
    np.testing.assert_allclose(df["source_p_mp"], points["p_mp"], rtol=1e-9)


def test_direct_coupled_battery_trades_power_for_position_on_the_curve(demo_module):
    # A bank below V_mp holds the array on the current-source side (m < 1),
    # where the Thevenin EMF lies far above Voc and the Norton current near Isc.
    system = make_system(demo_module, groups=((1, 3),), load=Load("battery", emf_v=26.4, resistance_ohm=0.03))
    r = operating_points(system, 800.0, 45.0).iloc[0]
    assert r["matching_ratio"] < 1.0
    assert r["thevenin_e_v"] > r["source_v_oc"]
    assert r["norton_i_a"] > r["i"]
    assert 0 < r["mpp_shortfall_w"] < r["source_p_mp"]


def test_conditions_per_group_from_the_file_the_call_or_a_dict():
    system = pvsource.load_system(DATA / "example-two-faces.toml")
    from_file = operating_points(system)
    assert from_file["group_east_irradiance_w_m2"].iloc[0] == 650.0
    mixed = operating_points(system, {"west": 900.0}, None)
    assert mixed["group_east_irradiance_w_m2"].iloc[0] == 650.0
    assert mixed["group_west_irradiance_w_m2"].iloc[0] == 900.0
    arrays = operating_points(system, np.array([[100.0, 200.0], [300.0, 400.0]]), 25.0)
    assert list(arrays["group_west_irradiance_w_m2"]) == [200.0, 400.0]
    assert isinstance(arrays, pd.DataFrame) and len(arrays) == 2


@pytest.mark.parametrize("g, t, match", [
    (-5.0, 25.0, "irradiance_w_m2"),
    (float("nan"), 25.0, "irradiance_w_m2"),
    (800.0, 500.0, "cell_temp_c"),
    ({"north": 800.0}, 25.0, "no such group"),
    (np.ones((3, 5)), 25.0, "shape"),
])
def test_bad_conditions_are_rejected(demo_module, g, t, match):
    system = _two_group_system(demo_module, Load("mpp"))
    with pytest.raises(InputError, match=match):
        operating_points(system, g, t)


def test_missing_conditions_are_an_error_not_a_silent_default(demo_module):
    system = make_system(demo_module)
    with pytest.raises(InputError, match="has no irradiance_w_m2, and none was given"):
        operating_points(system)


def test_non_convergence_raises_or_flags(demo_module, monkeypatch):
    monkeypatch.setattr(nw, "MAX_ITERATIONS", 1)
    system = make_system(demo_module, load=Load("battery", emf_v=52.0, resistance_ohm=0.05))
    with pytest.raises(ConvergenceError, match="did not converge"):
        operating_points(system, [800.0, 900.0], 40.0)
    df = operating_points(system, [800.0, 900.0], 40.0, on_failure="flag")
    assert not df["converged"].any()
    assert df["v"].isna().all()


def test_night_rows_are_clean(demo_module):
    system = make_system(demo_module, groups=((1, 3),), load=Load("battery", emf_v=26.4, resistance_ohm=0.03))
    r = operating_points(system, 0.0, 10.0).iloc[0]
    assert r["converged"]
    assert r["source_p_mp"] == 0.0 and r["source_i_sc"] == 0.0
    assert np.isnan(r["efficiency"])
    rec = point_record(system, r)
    assert rec["efficiency"] is None


def test_api_accepts_scalars_and_arrays():
    system = pvsource.load_system(DATA / "example-system.toml")
    one = pvsource.operating_points(system, 800.0, 45.0)
    many = pvsource.operating_points(system, np.full(20_000, 800.0), np.full(20_000, 45.0))
    assert len(one) == 1 and len(many) == 20_000
    for col in ("v", "i", "p", "thevenin_e_v", "thevenin_r_ohm", "norton_i_a", "delivered_w", "efficiency"):
        assert many[col].iloc[-1] == pytest.approx(one[col].iloc[0], rel=1e-12)


@pytest.mark.parametrize("groups, load", [
    (((10, 2), (2, 2)), Load("battery", emf_v=48.0, resistance_ohm=0.05)),   # short string beside a long one
    (((1, 1),), Load("battery", emf_v=500.0, resistance_ohm=0.05)),          # a bank far above Voc
    (((1, 1),), Load("voltage", emf_v=1e5)),                                 # an absurd but valid stiff voltage
    (((17, 1), (7, 1), (17, 1)), Load("resistor", resistance_ohm=1700.0)),  # large circulating power
    (((2, 2),), Load("resistor", resistance_ohm=1e-6)),                     # nearly a short circuit
    (((2, 2),), Load("voltage", emf_v=1e-9)),                                # nearly a short circuit, stiff
])
def test_hard_but_valid_systems_solve_and_balance(demo_module, groups, load):
    # Reference: brentq on KCL with pvlib's i_from_v (lambertw) for the bus
    # voltage (tests/reference.py).
    system = make_system(demo_module, groups=groups, load=load)
    g = np.array([[1000.0] * len(groups), [0.0] + [1000.0] * (len(groups) - 1), [300.0] * len(groups)])
    df = operating_points(system, g, 25.0)
    assert df["converged"].all()
    assert np.abs(df["energy_balance_residual"]).max() <= 1e-9
    e, r = load.thevenin()
    for k in range(len(g)):
        diode = ref.diode_at(demo_module.parameters, g[k], 25.0)
        ref_groups = [ref.group(diode, n_s, n_p, index=m) for m, (n_s, n_p) in enumerate(groups)]
        if r == 0.0:
            # Stiff bus: check the other way round, since pvlib's i_from_v
            # overflows at 1e5 V: v_from_i at our current must give the bus voltage.
            assert df["v"].iloc[k] == pytest.approx(e)
            i_string = df["group_g1_i_a"].iloc[k] / groups[0][1]
            assert ref.string_voltage(ref_groups[0], i_string) == pytest.approx(e, rel=1e-9, abs=1e-12)
            continue
        top = max(e, 60.0 * max(n for n, _ in groups)) * 1.01
        assert df["v"].iloc[k] == pytest.approx(ref.bus_voltage(ref_groups, e, r, top), rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("kwargs, match", [
    (dict(irradiance_w_m2=np.array([]), cell_temp_c=25.0), "no conditions"),
    (dict(irradiance_w_m2=np.ones(3), cell_temp_c=np.ones(4)), "same number"),
    (dict(irradiance_w_m2={"g1": np.ones((2, 2))}, cell_temp_c=25.0), "shape"),
    (dict(irradiance_w_m2=800.0, cell_temp_c=25.0, chunk_size=0), "chunk_size"),
    (dict(irradiance_w_m2=800.0, cell_temp_c=25.0, on_failure="ignore"), "on_failure"),
])
def test_api_edge_cases_are_input_errors(demo_module, kwargs, match):
    with pytest.raises(InputError, match=match):
        operating_points(make_system(demo_module), **kwargs)
