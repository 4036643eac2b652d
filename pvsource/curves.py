"""I-V and P-V curves of the array, and its Thevenin tangent at a point.

The curves are those of the array as its terminals (the combiner bus) see it:
every group's strings with their leads and home runs, joined at the bus. That
is the curve on which :func:`pvsource.operating.operating_points` places the
operating point, so the point and its Thevenin equivalent lie exactly on and
along it.

Each point of a curve is an exact solve of the network at a fixed bus voltage
(:func:`pvsource.network.solve_at_bus_voltage`), vectorised over conditions
and voltages together. The tangent at a point is the linearisation the whole
tool is built on: R_th = -dV/dI, E_th = V + R_th I, so the linear model
I = (E_th - V) / R_th touches the curve there and parts from it away from it.

References
----------
.. [1] J. W. Bishop, Solar Cells 25 (1988) 73-89, doi:10.1016/0379-6787(88)90059-2
       (diode-voltage form of the single-diode curve).
.. [2] W. De Soto, S. A. Klein, W. A. Beckman, Solar Energy 80 (2006) 78-88,
       doi:10.1016/j.solener.2005.06.010 (parameters at conditions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from pvsource.linear import Equivalent, linearise
from pvsource.module import parameters_at
from pvsource.network import Network, evaluate_groups, solve_at_bus_voltage, solve_thevenin
from pvsource.system import System


@dataclass(frozen=True)
class Curves:
    """I-V and P-V curves of the array at N conditions, K points each.

    Attributes
    ----------
    v : ndarray (N, K)
        Bus voltage, from 0 to the open-circuit voltage [V].
    i : ndarray (N, K)
        Array current at each voltage [A].
    p : ndarray (N, K)
        Array power V I [W].
    v_oc : ndarray (N,)
        Open-circuit bus voltage [V].
    """

    v: np.ndarray
    i: np.ndarray
    p: np.ndarray
    v_oc: np.ndarray


def _conditions(system: System, irradiance_w_m2, cell_temp_c):
    """Conditions as (N, G) arrays: a scalar or an (N,) array applies to every group."""
    def by_group(value):
        a = np.asarray(value, float)
        return a.reshape(-1, 1) if a.ndim <= 1 else a

    g, t = by_group(irradiance_w_m2), by_group(cell_temp_c)
    shape = (max(g.shape[0], t.shape[0]), len(system.groups))
    return np.broadcast_to(g, shape), np.broadcast_to(t, shape)


def _network(system: System, g, t) -> Network:
    wiring = system.wiring
    return Network(parameters_at(system.module.parameters, g, t), system.n_series, system.n_parallel,
                   wiring.r_string_ohm, wiring.r_home_ohm)


def array_curves(system: System, irradiance_w_m2, cell_temp_c, points: int = 120) -> Curves:
    """I-V and P-V curves of the array at its bus, at each condition.

    Parameters
    ----------
    system : System
        Module, groups and cable runs; the load side plays no part.
    irradiance_w_m2 : float, array (N,) or array (N, G)
        Effective irradiance on each group [W/m2].
    cell_temp_c : float, array (N,) or array (N, G)
        Cell temperature of each group [degC].
    points : int
        Voltages per curve, evenly spaced from 0 to the open-circuit voltage.

    Returns
    -------
    Curves
    """
    g, t = _conditions(system, irradiance_w_m2, cell_temp_c)
    n = g.shape[0]
    v_oc = solve_thevenin(_network(system, g, t), 0.0, np.inf).bus_v.reshape(n)
    v = v_oc[:, None] * np.linspace(0.0, 1.0, points)[None, :]
    # Every (condition, voltage) pair is one row of a single network solve.
    g_rows, t_rows = (np.repeat(a, points, axis=0) for a in (g, t))
    net = _network(system, g_rows, t_rows)
    sol = solve_at_bus_voltage(net, v.reshape(-1))
    i = evaluate_groups(net, sol.x_v).group_i_a.sum(axis=-1).reshape(n, points)
    return Curves(v=v, i=i, p=v * i, v_oc=v_oc)


def thevenin_at(system: System, irradiance_w_m2, cell_temp_c, bus_v) -> tuple[np.ndarray, Equivalent]:
    """The array's current and Thevenin equivalent at given bus voltages.

    Parameters
    ----------
    system : System
    irradiance_w_m2, cell_temp_c : float, array (N,) or array (N, G)
        Conditions, as for :func:`array_curves` [W/m2, degC].
    bus_v : float or array (N,)
        Bus voltage at which to linearise [V].

    Returns
    -------
    i_a : ndarray (N,)
        Array current at ``bus_v`` [A].
    equivalent : Equivalent
        E_th, R_th = -dV/dI and the Norton current there [V, ohm, A].
    """
    g, t = _conditions(system, irradiance_w_m2, cell_temp_c)
    n = max(g.shape[0], np.size(bus_v))
    g, t = (np.broadcast_to(a, (n, a.shape[1])) for a in (g, t))
    v = np.broadcast_to(np.asarray(bus_v, float).reshape(-1), (n,))
    net = _network(system, g, t)
    pt = evaluate_groups(net, solve_at_bus_voltage(net, v).x_v)
    i = pt.group_i_a.sum(axis=-1)
    return i, linearise(v, i, pt.conductance_s.sum(axis=-1))

