"""Thevenin and Norton equivalents of a source at its operating point.

A nonlinear source linearised at (V, I) with slope dI/dV is, to first order,
an EMF behind a resistance (Thevenin) or a current source beside a
conductance (Norton):

    R_th = -dV/dI,    E_th = V + R_th I,    I_N = E_th / R_th = I - V dI/dV.

The matching ratio m = (V/I) / R_th compares the load's static resistance with
the source's dynamic resistance. At the maximum power point dP/dV = 0, so
I + V dI/dV = 0 and m = 1: the maximum power transfer condition. For a linear
source with a resistive load, m = R_load / R_source and the efficiency is
m / (1 + m), 50 % at maximum power.

References
----------
.. [1] H. L. Thevenin, "Sur un nouveau theoreme d'electricite dynamique",
   C. R. Acad. Sci. 97 (1883) 159-161; E. L. Norton, Bell Labs memo (1926).
.. [2] C. K. Alexander, M. N. O. Sadiku, Fundamentals of Electric Circuits,
   McGraw-Hill, ch. 4 (superposition, Thevenin, Norton, maximum power transfer).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Equivalent:
    """A linearised source: Thevenin (e_v, r_ohm) and Norton (i_a, r_ohm).

    Attributes
    ----------
    e_v : ndarray
        Thevenin EMF [V].
    r_ohm : ndarray
        Thevenin and Norton resistance, -dV/dI [ohm].
    i_a : ndarray
        Norton current [A].
    """

    e_v: np.ndarray
    r_ohm: np.ndarray
    i_a: np.ndarray

    @property
    def conductance_s(self):
        return 1.0 / self.r_ohm

    def current_at(self, v):
        """Current the linear model predicts at terminal voltage ``v`` [A]."""
        return self.i_a - np.asarray(v) / self.r_ohm


def linearise(v, i, conductance_s) -> Equivalent:
    """Thevenin and Norton equivalents from an operating point and its slope.

    Parameters
    ----------
    v : array
        Terminal voltage [V].
    i : array
        Terminal current, positive out of the source [A].
    conductance_s : array
        Dynamic conductance -dI/dV at the point [S]; positive for a PV source.

    Returns
    -------
    Equivalent
    """
    v, i, g = (np.asarray(a, float) for a in (v, i, conductance_s))
    with np.errstate(divide="ignore", invalid="ignore"):
        r = 1.0 / g
        i_n = i + g * v
        e = i_n * r
    return Equivalent(e, r, i_n)


def matching_ratio(v, i, r_th_ohm):
    """Load static resistance over source dynamic resistance, (V/I) / R_th [-].

    1 at maximum power transfer; NaN where no current flows. A current whose
    drop across R_th is below 1e-9 of the terminal voltage counts as none: it
    is the solver's residual at open circuit (a tracker resting at Voc in
    float), not a current, and V/I there would read as about 1e15.
    """
    v, i, r = (np.asarray(a, float) for a in (v, i, r_th_ohm))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        m = v / (i * r)
    no_current = (i == 0.0) | (np.abs(i * r) <= 1e-9 * np.abs(v))
    return np.where(no_current, np.nan, m)


def linear_transfer(e_v, r_source_ohm, r_load_ohm):
    """A linear source feeding a resistor: current, load power, efficiency, matching.

    Parameters
    ----------
    e_v : array
        Source EMF [V].
    r_source_ohm, r_load_ohm : array
        Source and load resistances [ohm].

    Returns
    -------
    dict
        ``i_a``, ``p_load_w``, ``p_source_w`` (E I), ``efficiency`` (load power
        over source power, R_L / (R_s + R_L)) and ``matching_ratio`` (R_L / R_s).
    """
    e, rs, rl = (np.asarray(a, float) for a in (e_v, r_source_ohm, r_load_ohm))
    i = e / (rs + rl)
    return {
        "i_a": i,
        "p_load_w": i * i * rl,
        "p_source_w": e * i,
        "efficiency": rl / (rs + rl),
        "matching_ratio": rl / rs,
    }


def superposition(source_e_v, source_r_ohm, load_e_v, load_r_ohm):
    """Each source's share of the load current in a linear network on one node.

    Sources k (EMF E_k behind R_k) and a load branch (EMF E_L behind R_L) all
    join one node. The load current (E_L opposing) is, by superposition, the
    sum of the current each EMF drives with the others set to zero.

    Parameters
    ----------
    source_e_v, source_r_ohm : arrays (..., K)
        Thevenin EMF and resistance of each source [V, ohm].
    load_e_v : array (...)
        EMF of the load branch (a battery's, or 0) [V].
    load_r_ohm : array (...)
        Resistance of the load branch [ohm]; 0 for a stiff voltage.

    Returns
    -------
    shares_a : array (..., K)
        Each source's contribution to the load current [A].
    load_share_a : array (...)
        The load EMF's own contribution (negative: it pushes back) [A].
    total_a : array (...)
        Their sum, the load current of the linear network [A].
    """
    e = np.asarray(source_e_v, float)
    g = 1.0 / np.asarray(source_r_ohm, float)
    e_l = np.asarray(load_e_v, float)
    r_l = np.asarray(load_r_ohm, float)
    g_sum = g.sum(axis=-1)
    # Written with R_L in the numerator so a stiff load (R_L = 0) stays finite.
    divider = 1.0 / (1.0 + g_sum * r_l)
    shares = (e * g) * divider[..., None]
    load_share = -e_l * g_sum * divider
    return shares, load_share, shares.sum(axis=-1) + load_share
