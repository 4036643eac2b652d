"""Thevenin/Norton equivalents, matching ratio and superposition (circuit laws)."""

import numpy as np
import pytest

import reference as ref
from pvsource import linear


def test_maximum_power_transfer_of_a_linear_source():
    # Law (maximum power transfer theorem; Alexander & Sadiku, Fundamentals of
    # Electric Circuits, sec. 4.8): a source E behind R delivers at most
    # E^2 / (4 R), into R_L = R (m = 1), at 50 % efficiency.
    e, r = 48.0, 1.7
    at_match = linear.linear_transfer(e, r, r)
    assert at_match["p_load_w"] == pytest.approx(e**2 / (4 * r), rel=1e-12)
    assert at_match["efficiency"] == pytest.approx(0.5)
    assert at_match["matching_ratio"] == pytest.approx(1.0)
    loads = np.geomspace(r / 50, r * 50, 20001)
    sweep = linear.linear_transfer(e, r, loads)
    best = np.argmax(sweep["p_load_w"])
    assert sweep["matching_ratio"][best] == pytest.approx(1.0, rel=1e-3)
    assert sweep["p_load_w"].max() <= e**2 / (4 * r) * (1 + 1e-12)


def test_efficiency_is_m_over_one_plus_m():
    # Law: eta = R_L / (R + R_L) = m / (1 + m) for a linear source and a resistor.
    m = np.array([0.1, 0.5, 1.0, 2.0, 9.0])
    out = linear.linear_transfer(10.0, 2.0, 2.0 * m)
    np.testing.assert_allclose(out["efficiency"], m / (1 + m), rtol=1e-14)
    np.testing.assert_allclose(out["p_load_w"] / out["p_source_w"], out["efficiency"], rtol=1e-14)


def test_linearise_on_pvlibs_curve_gives_the_tangent_and_its_laws(demo_module):
    # Reference: the module's I-V curve from pvlib (singlediode key points and
    # i_from_v, tests/reference.py), its slope by central difference.
    groups = [ref.group(ref.diode_at(demo_module.parameters, 800.0, 45.0), 1, 1)]
    points = ref.key_points(ref.diode_at(demo_module.parameters, 800.0, 45.0))
    v_mp, i_mp, v_oc = float(points["v_mp"]), float(points["i_mp"]), float(points["v_oc"])
    v = np.array([0.5 * v_mp, v_mp, 0.98 * v_oc])
    i = np.array([ref.array_current(groups, x) for x in v])
    g = np.array([ref.conductance(groups, x) for x in v])
    eq = linear.linearise(v, i, g)
    # Law (Thevenin/Norton): the tangent's intercepts; 2 V and 2 I at the MPP,
    # where dP/dV = 0 gives R_th = V / I (maximum power transfer).
    assert eq.e_v[1] == pytest.approx(2 * v_mp, rel=1e-5)
    assert eq.i_a[1] == pytest.approx(2 * i_mp, rel=1e-5)
    assert linear.matching_ratio(v[1], i[1], eq.r_ohm[1]) == pytest.approx(1.0, rel=1e-5)
    # The tangent meets pvlib's curve at the point and over-predicts beside it (a concave curve).
    np.testing.assert_allclose(eq.current_at(v), i, rtol=1e-12)
    for dv in (-0.25, 0.25):
        assert eq.current_at(v + dv)[:2] == pytest.approx(
            [ref.array_current(groups, x) for x in (v + dv)[:2]], rel=2e-3)
        assert np.all(eq.current_at(v + dv) > [ref.array_current(groups, x) for x in v + dv])
    # GUIDE note 3: below V_mp a current source whose EMF lies far above pvlib's
    # Voc, near Voc a voltage source whose EMF is close to Voc.
    assert eq.e_v[0] > 2 * v_oc and eq.r_ohm[0] > 5 * v[0] / i[0]
    assert eq.e_v[2] == pytest.approx(v_oc, rel=0.02)


def test_matching_ratio_is_undefined_without_current():
    m = linear.matching_ratio(np.array([10.0, 0.0]), np.array([2.0, 0.0]), np.array([5.0, 1.0]))
    assert m[0] == pytest.approx(1.0)
    assert np.isnan(m[1])


def test_superposition_matches_nodal_analysis(rng):
    # Reference: the same one-node network solved directly with numpy.linalg.
    for _ in range(50):
        k = rng.integers(1, 5)
        e = rng.uniform(10, 200, k)
        r = rng.uniform(0.1, 50, k)
        e_l, r_l = rng.uniform(0, 100), rng.uniform(0.0, 5.0)
        shares, load_share, total = linear.superposition(e, r, e_l, r_l)
        if r_l == 0.0:
            v = e_l
        else:
            a = np.array([[np.sum(1 / r) + 1 / r_l]])
            b = np.array([np.sum(e / r) + e_l / r_l])
            v = np.linalg.solve(a, b)[0]
        i_load = np.sum((e - v) / r)
        assert total == pytest.approx(i_load, rel=1e-10, abs=1e-12)
        assert shares.sum() + load_share == pytest.approx(total, rel=1e-12)


def test_superposition_with_a_stiff_load_stays_finite():
    shares, load_share, total = linear.superposition(np.array([100.0]), np.array([10.0]), 60.0, 0.0)
    assert shares[0] == pytest.approx(10.0)
    assert load_share == pytest.approx(-6.0)
    assert total == pytest.approx(4.0)


def test_matching_ratio_at_pvlibs_open_circuit_is_undefined(demo_module):
    # Reference: pvlib's Voc and its i_from_v there (tests/reference.py). At Voc the
    # current is only the solver's residual (about 1e-14 A, either sign), so V/I is no
    # load resistance; just below Voc a real, small current gives a large finite m.
    diode = ref.diode_at(demo_module.parameters, 800.0, 45.0)
    groups = [ref.group(diode, 1, 1)]
    v_oc = float(ref.key_points(diode)["v_oc"])
    r_th = 1.0 / ref.conductance(groups, v_oc)
    for residual in (-1e-14, 0.0, 1e-14):
        assert np.isnan(linear.matching_ratio(v_oc, residual, r_th))
    v = 0.995 * v_oc
    i = ref.array_current(groups, v)
    m = float(linear.matching_ratio(v, i, 1.0 / ref.conductance(groups, v)))
    assert i > 1e-3 and 1.0 < m < 1e4
