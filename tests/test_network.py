"""The operating-point solver against independent solutions built from pvlib and scipy."""

import numpy as np
import pytest
from pvlib import pvsystem
from scipy.optimize import brentq, minimize_scalar

from pvsource import network as nw
from pvsource.module import parameters_at
from pvsource.network import Network, evaluate_groups, solve_at_bus_voltage, solve_max_power, solve_thevenin

from conftest import pvlib_cec_state


def _network(module, g, t, n_s, n_p, r_string=None, r_home=None):
    g = np.atleast_2d(g)
    t = np.atleast_2d(t)
    k = len(n_s)
    return Network(parameters_at(module.parameters, g, t), np.asarray(n_s, float), np.asarray(n_p, float),
                   np.zeros(k) if r_string is None else np.asarray(r_string, float),
                   np.zeros(k) if r_home is None else np.asarray(r_home, float))


def _reference_current(net: Network, row: int, v_bus: float) -> float:
    """Array current at a bus voltage from pvlib.pvsystem.i_from_v (reference).

    A string with lead r_s and home run r_h shared by n_p strings is, per
    module, the same diode with R_s' = R_s + (r_s + n_p r_h) / n_s.
    """
    st = net.state
    total = 0.0
    for k in range(len(net.n_series)):
        n_s, n_p = net.n_series[k], net.n_parallel[k]
        rs = st.r_s_ohm[row, k] + (net.r_string_ohm[k] + n_p * net.r_home_ohm[k]) / n_s
        total += n_p * float(pvsystem.i_from_v(v_bus / n_s, st.i_l_a[row, k], st.i_o_a[row, k], rs,
                                               st.r_sh_ohm[row, k], st.a_v[row, k], method="lambertw"))
    return total


def test_single_group_key_points_match_pvlib_singlediode(any_module, rng):
    # Reference: pvlib.pvsystem.singlediode (lambertw) scaled by series/parallel counts.
    n = 300
    g = rng.uniform(0, 1300, (n, 1))
    g[:10] = 0.0
    t = rng.uniform(-40, 90, (n, 1))
    net = _network(any_module, g, t, [4], [3])
    st = net.state
    ref = pvsystem.singlediode(st.i_l_a[:, 0], st.i_o_a[:, 0], st.r_s_ohm[:, 0], st.r_sh_ohm[:, 0], st.a_v[:, 0])
    oc = solve_thevenin(net, 0.0, np.inf)
    sc = solve_at_bus_voltage(net, 0.0)
    mp = solve_max_power(net)
    assert oc.converged.all() and sc.converged.all() and mp.converged.all()
    np.testing.assert_allclose(oc.bus_v, 4 * ref["v_oc"], rtol=1e-9, atol=1e-9)
    i_sc = evaluate_groups(net, sc.x_v).group_i_a[:, 0]
    np.testing.assert_allclose(i_sc, 3 * ref["i_sc"], rtol=1e-9, atol=1e-12)
    i_mp = evaluate_groups(net, mp.x_v).group_i_a[:, 0]
    np.testing.assert_allclose(mp.bus_v * i_mp, 12 * ref["p_mp"], rtol=1e-9, atol=1e-9)
    lit = g[:, 0] > 1.0
    np.testing.assert_allclose(mp.bus_v[lit], 4 * ref["v_mp"][lit], rtol=1e-5)
    # Reference: pvlib.pvsystem.calcparams_cec, so the six-parameter
    # module's adjustment reaches the solver's state.
    il, io, _, _, a = pvlib_cec_state(any_module.parameters, g[lit], t[lit])
    np.testing.assert_allclose(st.i_l_a[lit], il, rtol=1e-12)
    np.testing.assert_allclose(st.i_o_a[lit], io, rtol=1e-12)
    np.testing.assert_allclose(st.a_v[lit], a, rtol=1e-12)


def test_battery_with_cables_matches_a_bracketed_root_of_kcl(any_module, rng):
    # Reference: scipy.optimize.brentq on KCL, with group currents from pvlib's
    # i_from_v. Two mismatched groups, string leads, home runs and a feeder.
    n = 40
    g = rng.uniform(50, 1200, (n, 2))
    t = rng.uniform(-10, 70, (n, 2))
    net = _network(any_module, g, t, [3, 3], [2, 1], r_string=[0.05, 0.08], r_home=[0.02, 0.04])
    emf, r_branch = 88.0, 0.12
    sol = solve_thevenin(net, emf, r_branch)
    assert sol.converged.all()
    for row in range(n):
        f = lambda v: _reference_current(net, row, v) - (v - emf) / r_branch  # noqa: E731
        v_ref = brentq(f, 0.0, 150.0, xtol=1e-12)
        assert sol.bus_v[row] == pytest.approx(v_ref, rel=1e-9)


def test_max_power_through_a_feeder_matches_a_scalar_maximisation(demo_module, rng):
    # Reference: scipy.optimize.minimize_scalar of the delivered power, with
    # the array current from pvlib's i_from_v.
    n = 15
    g = rng.uniform(100, 1100, (n, 2))
    t = rng.uniform(0, 60, (n, 2))
    net = _network(demo_module, g, t, [4, 4], [2, 1], r_home=[0.05, 0.09])
    r_f = 0.3
    sol = solve_max_power(net, r_f)
    assert sol.converged.all()
    for row in range(n):
        def neg_power(v):
            i = _reference_current(net, row, v)
            return -(v - i * r_f) * i
        res = minimize_scalar(neg_power, bounds=(0.0, 4 * 45.0), method="bounded", options={"xatol": 1e-10})
        i = evaluate_groups(net, sol.x_v).group_i_a[row].sum()
        ours = (sol.bus_v[row] - i * r_f) * i
        assert ours == pytest.approx(-res.fun, rel=1e-9)
        assert ours >= -res.fun * (1 - 1e-12)


def test_mismatched_open_circuit_matches_a_bracketed_root(demo_module, rng):
    # Reference: brentq on zero array current; a weak group is back-fed by a strong one.
    g = np.array([[1100.0, 5.0], [900.0, 300.0], [20.0, 1000.0]])
    t = np.array([[60.0, 10.0], [40.0, 30.0], [0.0, 70.0]])
    net = _network(demo_module, g, t, [3, 3], [2, 1], r_home=[0.02, 0.04])
    sol = solve_thevenin(net, 0.0, np.inf)
    for row in range(3):
        v_ref = brentq(lambda v: _reference_current(net, row, v), 1.0, 150.0, xtol=1e-12)
        assert sol.bus_v[row] == pytest.approx(v_ref, rel=1e-9)


def test_the_dark_and_back_feed_are_valid_conditions(demo_module):
    net = _network(demo_module, [[0.0], [0.0]], [[20.0], [20.0]], [2], [1])
    sol = solve_thevenin(net, 26.0, 0.05)
    assert sol.converged.all()
    i = evaluate_groups(net, sol.x_v).group_i_a[:, 0]
    # A 26 V bank on two dark modules: the diodes draw a little current back.
    assert np.all(i <= 0.0) and np.all(i > -1.0)
    mp = solve_max_power(net)
    assert mp.converged.all()
    np.testing.assert_allclose(mp.bus_v, 0.0)


def test_stiff_voltage_load_holds_the_bus(demo_module):
    net = _network(demo_module, [[800.0, 400.0]], [[45.0, 30.0]], [2, 2], [1, 1], r_home=[0.1, 0.1])
    sol = solve_thevenin(net, 60.0, 0.0)
    assert sol.bus_v[0] == pytest.approx(60.0)
    assert np.max(np.abs(evaluate_groups(net, sol.x_v).bus_v - 60.0)) < 1e-7


def test_solver_converges_across_the_whole_condition_range(demo_module, rng):
    # Irradiance 0-1500 W/m2, cell temperature -40 to 90 degC, three load kinds.
    n = 2000
    g = rng.uniform(0, 1500, (n, 2))
    t = rng.uniform(-40, 90, (n, 2))
    net = _network(demo_module, g, t, [2, 3], [3, 1], r_string=[0.1, 0.0], r_home=[0.05, 0.2])
    for emf, r in ((0.0, np.inf), (0.0, 5.0), (50.0, 0.05), (150.0, 0.05), (30.0, 0.0)):
        assert solve_thevenin(net, emf, r).converged.all()
    assert solve_max_power(net, 0.2).converged.all()


def test_non_convergence_is_reported(demo_module, monkeypatch):
    monkeypatch.setattr(nw, "MAX_ITERATIONS", 1)
    net = _network(demo_module, [[800.0]], [[40.0]], [3], [2])
    sol = solve_thevenin(net, 26.0, 0.05)
    assert not sol.converged.all()
