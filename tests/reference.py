"""Independent solutions that tests compare pvsource against.

Everything here is built from pvlib, scipy and numpy on plain numbers: the
reference single-diode parameters (read by attribute name), the string counts
and the cable resistances. Nothing here imports pvsource, so a test that
compares pvsource's solver with these functions compares it with pvlib's own
single-diode solutions (Lambert W, Jain & Kapoor 2004, doi:10.1016/j.solmat.2003.11.018)
and scipy's bracketed root finder and bounded scalar maximiser.

A group is a dict of plain numbers: the module's five single-diode values at
its conditions (``il, io, rs, rsh, a``), ``n_s`` modules per string, ``n_p``
strings, and the optional ``r_string`` (each string's own leads) and
``r_home`` (the group's home run) in ohms.
"""

import numpy as np
from pvlib import pvsystem
from scipy.optimize import brentq, minimize_scalar

KEYS = ("il", "io", "rs", "rsh", "a")


def diode_at(params, irradiance_w_m2, cell_temp_c) -> dict:
    """The five single-diode values at conditions, from pvlib's CEC model.

    Reference: :func:`pvlib.pvsystem.calcparams_cec` (De Soto et al. 2006,
    doi:10.1016/j.solener.2005.06.010, with Dobos's temperature-coefficient
    adjustment, doi:10.1115/1.4005759) on the reference parameters' plain
    numbers; an adjustment of zero, or none, is De Soto's model.
    Returns arrays broadcast to the conditions' shape.
    """
    g = np.asarray(irradiance_w_m2, dtype=float)
    t = np.asarray(cell_temp_c, dtype=float)
    with np.errstate(divide="ignore", over="ignore"):
        values = pvsystem.calcparams_cec(
            g, t, params.alpha_sc_a_per_c, params.a_ref_v, params.i_l_ref_a, params.i_o_ref_a,
            params.r_sh_ref_ohm, params.r_s_ohm, getattr(params, "adjust_pct", 0.0), EgRef=params.eg_ref_ev,
            dEgdT=params.degdt_per_c)
    shape = np.broadcast_shapes(g.shape, t.shape)
    return {k: np.broadcast_to(np.asarray(v, float), shape).copy() for k, v in zip(KEYS, values)}


def group(diode: dict, n_s, n_p, r_string=0.0, r_home=0.0, index=()) -> dict:
    """One group at one condition: ``diode`` values taken at ``index``."""
    return {**{k: float(np.asarray(diode[k])[index]) for k in KEYS}, "n_s": float(n_s), "n_p": float(n_p),
            "r_string": float(r_string), "r_home": float(r_home)}


def key_points(diode: dict, n_s=1, n_p=1) -> dict:
    """Voc, Isc, Vmp, Imp and Pmp of n_s x n_p modules from pvlib's singlediode (Lambert W)."""
    ref = pvsystem.singlediode(*(diode[k] for k in KEYS), method="lambertw")
    scale = {"v_oc": n_s, "i_sc": n_p, "v_mp": n_s, "i_mp": n_p, "p_mp": n_s * n_p}
    shape = np.shape(diode["il"])
    return {k: f * np.reshape(np.asarray(ref[k], float), shape) for k, f in scale.items()}


def _series_r(g: dict) -> float:
    # A string with leads r_string and a home run r_home shared by n_p strings
    # is, per module, the same diode with R_s' = R_s + (r_string + n_p r_home) / n_s.
    return g["rs"] + (g["r_string"] + g["n_p"] * g["r_home"]) / g["n_s"]


def array_current(groups, v_bus):
    """Current out of parallel groups at bus voltages [A], from pvlib's i_from_v (Lambert W).

    A float for one voltage, an array for an array of them.
    """
    v = np.asarray(v_bus, dtype=float)
    total = sum(g["n_p"] * np.asarray(pvsystem.i_from_v(v / g["n_s"], g["il"], g["io"], _series_r(g), g["rsh"],
                                                        g["a"], method="lambertw"), float)
                for g in groups)
    return float(total) if np.ndim(total) == 0 else total


def string_voltage(g: dict, i_string: float) -> float:
    """A group's string voltage at a current per string [V], from pvlib's v_from_i (Lambert W)."""
    return g["n_s"] * float(pvsystem.v_from_i(i_string, g["il"], g["io"], _series_r(g), g["rsh"], g["a"],
                                              method="lambertw"))


def conductance(groups, v_bus, step_v: float = 1e-4):
    """-dI/dV of the array at the bus [S], by a central difference of :func:`array_current`."""
    return -(array_current(groups, v_bus + step_v) - array_current(groups, v_bus - step_v)) / (2 * step_v)


def bus_voltage(groups, emf_v: float, r_ohm: float, top_v: float) -> float:
    """Bus voltage of the array on a load E + I R [V]: scipy's brentq on Kirchhoff's current law.

    ``r_ohm = inf`` is an open circuit; ``r_ohm = 0`` a stiff voltage. ``top_v``
    bounds the search from above (any voltage above every string's Voc and E).
    """
    if r_ohm == 0.0:
        return float(emf_v)
    if np.isinf(r_ohm):
        f = lambda v: array_current(groups, v)  # noqa: E731
    else:
        f = lambda v: array_current(groups, v) - (v - emf_v) / r_ohm  # noqa: E731
    if f(0.0) <= 0.0:
        return 0.0
    return float(brentq(f, 0.0, top_v, xtol=1e-15, rtol=1e-14))


def max_power(groups, r_feeder_ohm: float, top_v: float) -> tuple[float, float]:
    """The most power the array delivers through a feeder, and the bus voltage there.

    scipy's bounded scalar maximisation of (V - I R_f) I over the bus voltage,
    with the array current from pvlib's i_from_v. Returns (power [W], bus voltage [V]).
    """
    def neg_power(v):
        i = array_current(groups, v)
        return -(v - i * r_feeder_ohm) * i

    res = minimize_scalar(neg_power, bounds=(0.0, top_v), method="bounded", options={"xatol": 1e-10})
    return -float(res.fun), float(res.x)
