"""The array's I-V curves and Thevenin tangents, against pvlib's own single-diode solutions."""

import numpy as np
import pytest

import reference as ref
from pvsource.curves import array_curves, thevenin_at

from conftest import cable, make_system

# Hot roof, cold morning, low light and STC: where designs are checked.
CONDITIONS = [(1000.0, 65.0), (600.0, -20.0), (100.0, 25.0), (1000.0, 25.0)]


def _groups(module, g, t, *counts_and_r_home):
    """Groups at one condition each, from pvlib alone (tests/reference.py).

    ``counts_and_r_home`` holds (n_s, n_p, r_string, r_home) per group; the
    conditions ``g`` and ``t`` are one value per group.
    """
    g, t = np.broadcast_to(g, len(counts_and_r_home)), np.broadcast_to(t, len(counts_and_r_home))
    return [ref.group(ref.diode_at(module.parameters, g[k], t[k]), n_s, n_p, r_s, r_h)
            for k, (n_s, n_p, r_s, r_h) in enumerate(counts_and_r_home)]


@pytest.mark.parametrize("g, t", CONDITIONS)
def test_one_group_with_cables_matches_pvlib_lambertw(demo_module, g, t):
    system = make_system(demo_module, groups=((3, 2),), cables=(cable("string", 10, 8.0, "g1"),
                                                                cable("home-run", 15, 3.0, "g1")))
    curves = array_curves(system, g, t, points=60)
    groups = _groups(demo_module, g, t, (3, 2, 2 * 10 * 8.0 / 1000, 2 * 15 * 3.0 / 1000))
    i_ref = ref.array_current(groups, curves.v[0])
    # Reference: pvlib.pvsystem.i_from_v (Lambert W) on pvlib.pvsystem.calcparams_cec parameters.
    np.testing.assert_allclose(curves.i[0], i_ref, atol=1e-7 * i_ref[0] + 1e-9)
    np.testing.assert_allclose(curves.p[0], curves.v[0] * i_ref, atol=1e-6 * i_ref[0] * curves.v_oc[0])
    # Reference: pvlib.pvsystem.singlediode; no current flows at open circuit, so cables do not move Voc.
    v_oc = ref.key_points(ref.diode_at(demo_module.parameters, g, t), 3, 2)["v_oc"]
    assert curves.v_oc[0] == pytest.approx(float(v_oc), rel=1e-7)


def test_mismatched_groups_add_their_currents_at_the_bus(demo_module):
    # Two groups of different length at different light, each with a home run.
    system = make_system(demo_module, groups=((3, 2), (2, 1)),
                         cables=(cable("home-run", 12, 5.0, "g1"), cable("home-run", 8, 5.0, "g2")))
    g = np.array([[900.0, 300.0], [200.0, 800.0]])
    t = np.array([[50.0, 30.0], [5.0, 40.0]])
    curves = array_curves(system, g, t, points=50)
    for k in range(2):
        # Reference: pvlib.pvsystem.i_from_v per group, summed at one bus voltage (KCL).
        groups = _groups(demo_module, g[k], t[k], (3, 2, 0.0, 2 * 12 * 5.0 / 1000), (2, 1, 0.0, 2 * 8 * 5.0 / 1000))
        i_ref = ref.array_current(groups, curves.v[k])
        np.testing.assert_allclose(curves.i[k], i_ref, atol=1e-7 * abs(i_ref).max())
        # The curve ends at zero current: its last point is the open circuit.
        assert abs(curves.i[k, -1]) < 1e-6 * abs(i_ref).max()


@pytest.mark.parametrize("g, t", CONDITIONS)
def test_tangent_slope_is_pvlibs_and_matches_at_the_mpp(demo_module, g, t):
    system = make_system(demo_module, groups=((3, 2),))
    sd = {k: float(x) for k, x in ref.key_points(ref.diode_at(demo_module.parameters, g, t), 3, 2).items()}
    v = np.array([0.3, 0.9, 1.0, 1.05]) * sd["v_mp"]
    i, eq = thevenin_at(system, g, t, v)
    # Reference: a central difference of pvlib.pvsystem.i_from_v gives dI/dV; R_th = -dV/dI.
    groups = _groups(demo_module, g, t, (3, 2, 0.0, 0.0))
    ref_i = ref.array_current(groups, v)
    np.testing.assert_allclose(i, ref_i, rtol=1e-8)
    np.testing.assert_allclose(eq.r_ohm, 1.0 / ref.conductance(groups, v), rtol=1e-5)
    np.testing.assert_allclose(eq.e_v, v + eq.r_ohm * ref_i, rtol=1e-5)
    # Law (maximum power transfer): at pvlib's MPP the tangent's resistance equals V / I, m = 1.
    _, at_mpp = thevenin_at(system, g, t, sd["v_mp"])
    m = sd["v_mp"] / (sd["i_mp"] * at_mpp.r_ohm[0])
    assert m == pytest.approx(1.0, abs=1e-5)
    # Below the MPP the string is a current source: E_th lies above its Voc.
    assert eq.e_v[0] > sd["v_oc"]
