"""Property-based checks of the physics on random systems and conditions (hypothesis)."""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pvsource import conductors
from pvsource.module import key_points, parameters_at
from pvsource.operating import operating_points
from pvsource.system import Load

import reference as ref
from conftest import cable, make_system

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])

groups = st.lists(st.tuples(st.integers(1, 12), st.integers(1, 6)), min_size=1, max_size=3)
loads = st.one_of(
    st.just(Load("mpp")),
    st.builds(lambda r: Load("resistor", resistance_ohm=r), st.floats(0.01, 500.0)),
    st.builds(lambda e: Load("voltage", emf_v=e), st.floats(1.0, 600.0)),
    st.builds(lambda e, r: Load("battery", emf_v=e, resistance_ohm=r), st.floats(1.0, 600.0), st.floats(0.0, 2.0)),
)
conditions = st.tuples(st.floats(0.0, 1500.0), st.floats(-40.0, 90.0))


@SETTINGS
@given(groups=groups, load=loads, cond=st.lists(conditions, min_size=1, max_size=6),
       feeder=st.floats(0.0, 200.0), home=st.floats(0.0, 50.0))
def test_energy_is_conserved_and_the_solver_converges_on_any_valid_system(demo_module, groups, load, cond, feeder,
                                                                          home):
    # Law: conservation of energy on every solve; the solver converges for
    # irradiance 0-1500 W/m2 and cells -40 to 90 degC on any valid system.
    runs = [cable("feeder", feeder, 3.4)] if feeder > 0 else []
    if home > 0:
        runs.append(cable("home-run", home, 5.0, "g1"))
    system = make_system(demo_module, groups=tuple(groups), cables=tuple(runs), load=load)
    g = np.array([[c[0]] * len(groups) for c in cond])
    t = np.array([[c[1]] * len(groups) for c in cond])
    df = operating_points(system, g, t)
    assert df["converged"].all()
    assert np.abs(df["energy_balance_residual"]).max() <= 1e-9
    assert (df["efficiency"].dropna() <= 1.0 + 1e-9).all()


@SETTINGS
@given(current=st.floats(0.5, 300.0), length=st.floats(0.5, 500.0), series=st.sampled_from(["awg", "metric"]),
       material=st.sampled_from(["copper", "aluminium"]), temp=st.floats(-20.0, 120.0))
def test_a_bigger_conductor_never_loses_more(current, length, series, material, temp):
    sizes = conductors.standard_sizes(series)
    r = conductors.loop_resistance_ohm(length, [s.area_mm2 for s in sizes], material, temp)
    loss = current * current * np.asarray(r)
    assert np.all(np.diff(loss) < 0)


@SETTINGS
@given(g=st.floats(50.0, 1500.0), t_cold=st.floats(-40.0, 60.0), dt=st.floats(0.5, 30.0))
def test_colder_cells_give_a_higher_voc(demo_module, g, t_cold, dt):
    kp = key_points(parameters_at(demo_module.parameters, np.array([g, g]), np.array([t_cold, t_cold + dt])))
    assert kp["v_oc"][0] > kp["v_oc"][1]


@SETTINGS
@given(g=st.floats(1.0, 1400.0), dg=st.floats(1.0, 100.0), t=st.floats(-40.0, 90.0))
def test_more_irradiance_gives_more_current(demo_module, g, dg, t):
    kp = key_points(parameters_at(demo_module.parameters, np.array([g, g + dg]), np.array([t, t])))
    assert kp["i_sc"][1] > kp["i_sc"][0] and kp["i_mp"][1] > kp["i_mp"][0]


@SETTINGS
@given(g=st.floats(100.0, 1200.0), t=st.floats(-20.0, 75.0), r=st.floats(0.5, 60.0))
def test_the_linearisation_is_exact_at_the_point_and_second_order_near_it(demo_module, g, t, r):
    # Law (Taylor): the tangent's error grows with the square of the step, so
    # halving the step divides it by about four. The exact curve is pvlib's
    # i_from_v (tests/reference.py), not pvsource's solver.
    system = make_system(demo_module, groups=((3, 2),), load=Load("resistor", resistance_ohm=r))
    row = operating_points(system, g, t).iloc[0]
    groups = [ref.group(ref.diode_at(demo_module.parameters, g, t), 3, 2)]
    assert row["i"] == pytest.approx(ref.array_current(groups, row["v"]), rel=1e-9, abs=1e-9)
    errors = []
    for h in (0.02, 0.01):
        v = row["v"] * (1 - h)
        linear = (row["thevenin_e_v"] - v) / row["thevenin_r_ohm"]
        errors.append(abs(linear - ref.array_current(groups, v)))
    if errors[0] > 1e-7 * abs(row["i"]) + 1e-12:
        assert 2.5 < errors[0] / errors[1] < 5.5
