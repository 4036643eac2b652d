"""The operating-point solver against independent solutions built from pvlib and scipy."""

import numpy as np
import pytest

import reference as ref
from pvsource import network as nw
from pvsource.module import parameters_at
from pvsource.network import Network, evaluate_groups, solve_at_bus_voltage, solve_max_power, solve_thevenin


def _network(module, g, t, n_s, n_p, r_string=None, r_home=None):
    g = np.atleast_2d(g)
    t = np.atleast_2d(t)
    k = len(n_s)
    return Network(parameters_at(module.parameters, g, t), np.asarray(n_s, float), np.asarray(n_p, float),
                   np.zeros(k) if r_string is None else np.asarray(r_string, float),
                   np.zeros(k) if r_home is None else np.asarray(r_home, float))


def _reference_groups(module, g, t, n_s, n_p, row, r_string=None, r_home=None):
    """The network's groups at one condition, from pvlib alone (tests/reference.py)."""
    diode = ref.diode_at(module.parameters, np.atleast_2d(g)[row], np.atleast_2d(t)[row])
    k = len(n_s)
    r_string = np.zeros(k) if r_string is None else r_string
    r_home = np.zeros(k) if r_home is None else r_home
    return [ref.group(diode, n_s[m], n_p[m], r_string[m], r_home[m], index=m) for m in range(k)]


def test_single_group_key_points_match_pvlib_singlediode(any_module, rng):
    # Reference: pvlib.pvsystem.singlediode (lambertw) scaled by series/parallel counts.
    n = 300
    g = rng.uniform(0, 1300, (n, 1))
    g[:10] = 0.0
    t = rng.uniform(-40, 90, (n, 1))
    net = _network(any_module, g, t, [4], [3])
    diode = ref.diode_at(any_module.parameters, g[:, 0], t[:, 0])
    points = ref.key_points(diode, 4, 3)
    oc = solve_thevenin(net, 0.0, np.inf)
    sc = solve_at_bus_voltage(net, 0.0)
    mp = solve_max_power(net)
    assert oc.converged.all() and sc.converged.all() and mp.converged.all()
    np.testing.assert_allclose(oc.bus_v, points["v_oc"], rtol=1e-9, atol=1e-9)
    i_sc = evaluate_groups(net, sc.x_v).group_i_a[:, 0]
    np.testing.assert_allclose(i_sc, points["i_sc"], rtol=1e-9, atol=1e-12)
    i_mp = evaluate_groups(net, mp.x_v).group_i_a[:, 0]
    np.testing.assert_allclose(mp.bus_v * i_mp, points["p_mp"], rtol=1e-9, atol=1e-9)
    lit = g[:, 0] > 1.0
    np.testing.assert_allclose(mp.bus_v[lit], points["v_mp"][lit], rtol=1e-5)
    # Reference: pvlib.pvsystem.calcparams_cec, so the six-parameter
    # module's adjustment reaches the solver's state.
    for ours, key in ((net.state.i_l_a, "il"), (net.state.i_o_a, "io"), (net.state.a_v, "a")):
        np.testing.assert_allclose(ours[lit, 0], diode[key][lit], rtol=1e-12)


def test_battery_with_cables_matches_a_bracketed_root_of_kcl(any_module, rng):
    # Reference: scipy.optimize.brentq on KCL, with group currents from pvlib's
    # i_from_v. Two mismatched groups, string leads, home runs and a feeder.
    n = 40
    g = rng.uniform(50, 1200, (n, 2))
    t = rng.uniform(-10, 70, (n, 2))
    wiring = dict(r_string=[0.05, 0.08], r_home=[0.02, 0.04])
    net = _network(any_module, g, t, [3, 3], [2, 1], **wiring)
    emf, r_branch = 88.0, 0.12
    sol = solve_thevenin(net, emf, r_branch)
    assert sol.converged.all()
    for row in range(n):
        groups = _reference_groups(any_module, g, t, [3, 3], [2, 1], row, **wiring)
        assert sol.bus_v[row] == pytest.approx(ref.bus_voltage(groups, emf, r_branch, 150.0), rel=1e-9)


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
        groups = _reference_groups(demo_module, g, t, [4, 4], [2, 1], row, r_home=[0.05, 0.09])
        p_ref, _ = ref.max_power(groups, r_f, 4 * 45.0)
        i = evaluate_groups(net, sol.x_v).group_i_a[row].sum()
        ours = (sol.bus_v[row] - i * r_f) * i
        assert ours == pytest.approx(p_ref, rel=1e-9)
        assert ours >= p_ref * (1 - 1e-12)


def test_mismatched_open_circuit_matches_a_bracketed_root(demo_module, rng):
    # Reference: brentq on zero array current; a weak group is back-fed by a strong one.
    g = np.array([[1100.0, 5.0], [900.0, 300.0], [20.0, 1000.0]])
    t = np.array([[60.0, 10.0], [40.0, 30.0], [0.0, 70.0]])
    net = _network(demo_module, g, t, [3, 3], [2, 1], r_home=[0.02, 0.04])
    sol = solve_thevenin(net, 0.0, np.inf)
    for row in range(3):
        groups = _reference_groups(demo_module, g, t, [3, 3], [2, 1], row, r_home=[0.02, 0.04])
        assert sol.bus_v[row] == pytest.approx(ref.bus_voltage(groups, 0.0, np.inf, 150.0), rel=1e-9)


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
