"""The array's I-V curves and Thevenin tangents, against pvlib's own single-diode solutions."""

import numpy as np
import pytest
from pvlib import pvsystem

from pvsource.curves import array_curves, thevenin_at

from conftest import cable, make_system

# Hot roof, cold morning, low light and STC: where designs are checked.
CONDITIONS = [(1000.0, 65.0), (600.0, -20.0), (100.0, 25.0), (1000.0, 25.0)]


def _pvlib_string_current(module, n_s, n_p, r_extra_ohm, g, t, v_bus):
    """Group current at bus voltage from pvlib alone.

    A string of n_s modules whose lead and share of the home run add
    r_extra_ohm is a module with R_s + r_extra / n_s at V / n_s (KVL along
    the string); n_p strings add their currents (KCL).
    """
    p = module.parameters
    il, io, rs, rsh, a = pvsystem.calcparams_desoto(
        g, t, p.alpha_sc_a_per_c, p.a_ref_v, p.i_l_ref_a, p.i_o_ref_a, p.r_sh_ref_ohm, p.r_s_ohm,
        EgRef=p.eg_ref_ev, dEgdT=p.degdt_per_c)
    return n_p * np.asarray(pvsystem.i_from_v(np.asarray(v_bus) / n_s, il, io, rs + r_extra_ohm / n_s, rsh, a,
                                              method="lambertw"), float)


@pytest.mark.parametrize("g, t", CONDITIONS)
def test_one_group_with_cables_matches_pvlib_lambertw(demo_module, g, t):
    system = make_system(demo_module, groups=((3, 2),), cables=(cable("string", 10, 8.0, "g1"),
                                                                cable("home-run", 15, 3.0, "g1")))
    curves = array_curves(system, g, t, points=60)
    r_string = 2 * 10 * 8.0 / 1000
    r_home = 2 * 15 * 3.0 / 1000
    ref = _pvlib_string_current(demo_module, 3, 2, r_string + 2 * r_home, g, t, curves.v[0])
    # Reference: pvlib.pvsystem.i_from_v (Lambert W) on pvlib.pvsystem.calcparams_desoto parameters.
    np.testing.assert_allclose(curves.i[0], ref, atol=1e-7 * ref[0] + 1e-9)
    np.testing.assert_allclose(curves.p[0], curves.v[0] * ref, atol=1e-6 * ref[0] * curves.v_oc[0])
    # Reference: pvlib.pvsystem.singlediode; no current flows at open circuit, so cables do not move Voc.
    p = demo_module.parameters
    sd = pvsystem.singlediode(*pvsystem.calcparams_desoto(
        g, t, p.alpha_sc_a_per_c, p.a_ref_v, p.i_l_ref_a, p.i_o_ref_a, p.r_sh_ref_ohm, p.r_s_ohm))
    assert curves.v_oc[0] == pytest.approx(3 * float(sd["v_oc"]), rel=1e-7)


def test_mismatched_groups_add_their_currents_at_the_bus(demo_module):
    # Two groups of different length at different light, each with a home run.
    system = make_system(demo_module, groups=((3, 2), (2, 1)),
                         cables=(cable("home-run", 12, 5.0, "g1"), cable("home-run", 8, 5.0, "g2")))
    g = np.array([[900.0, 300.0], [200.0, 800.0]])
    t = np.array([[50.0, 30.0], [5.0, 40.0]])
    curves = array_curves(system, g, t, points=50)
    for k in range(2):
        # Reference: pvlib.pvsystem.i_from_v per group, summed at one bus voltage (KCL).
        ref = (_pvlib_string_current(demo_module, 3, 2, 2 * 2 * 12 * 5.0 / 1000, g[k, 0], t[k, 0], curves.v[k])
               + _pvlib_string_current(demo_module, 2, 1, 2 * 8 * 5.0 / 1000, g[k, 1], t[k, 1], curves.v[k]))
        np.testing.assert_allclose(curves.i[k], ref, atol=1e-7 * abs(ref).max())
        # The curve ends at zero current: its last point is the open circuit.
        assert abs(curves.i[k, -1]) < 1e-6 * abs(ref).max()


@pytest.mark.parametrize("g, t", CONDITIONS)
def test_tangent_slope_is_pvlibs_and_matches_at_the_mpp(demo_module, g, t):
    system = make_system(demo_module, groups=((3, 2),))
    p = demo_module.parameters
    params = pvsystem.calcparams_desoto(g, t, p.alpha_sc_a_per_c, p.a_ref_v, p.i_l_ref_a, p.i_o_ref_a,
                                        p.r_sh_ref_ohm, p.r_s_ohm)
    sd = pvsystem.singlediode(*params)
    v = np.array([0.3, 0.9, 1.0, 1.05]) * 3 * float(sd["v_mp"])
    i, eq = thevenin_at(system, g, t, v)
    # Reference: a central difference of pvlib.pvsystem.i_from_v gives dI/dV; R_th = -dV/dI.
    h = 1e-4
    ref_i = _pvlib_string_current(demo_module, 3, 2, 0.0, g, t, v)
    slope = (_pvlib_string_current(demo_module, 3, 2, 0.0, g, t, v + h)
             - _pvlib_string_current(demo_module, 3, 2, 0.0, g, t, v - h)) / (2 * h)
    np.testing.assert_allclose(i, ref_i, rtol=1e-8)
    np.testing.assert_allclose(eq.r_ohm, -1.0 / slope, rtol=1e-5)
    np.testing.assert_allclose(eq.e_v, v + eq.r_ohm * ref_i, rtol=1e-5)
    # Law (maximum power transfer): at pvlib's MPP the tangent's resistance equals V / I, m = 1.
    _, at_mpp = thevenin_at(system, g, t, 3 * float(sd["v_mp"]))
    m = 3 * float(sd["v_mp"]) / (2 * float(sd["i_mp"]) * at_mpp.r_ohm[0])
    assert m == pytest.approx(1.0, abs=1e-5)
    # Below the MPP the string is a current source: E_th lies above its Voc.
    assert eq.e_v[0] > 3 * float(sd["v_oc"])
