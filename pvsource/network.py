"""The exact operating point of string groups feeding a combiner bus and a load.

Topology
--------
Each group g has ``n_p`` identical strings of ``n_s`` modules; each string has
its own lead (loop resistance ``r_string``) and the group has a home run
(``r_home``) to a common combiner bus. Beyond the bus, everything the array
feeds is either a Thevenin branch (EMF ``E``, resistance ``R``, the feeder
included) or a maximum-power load.

Unknowns and equations
----------------------
Per condition: the diode voltage ``x_g`` of one module in each group, and the
bus voltage ``V``. Group g imposes on the bus

    F_g(x) = n_s x - I(x) (n_s R_s + r_string + n_p r_home),   J_g = n_p I(x),

so KVL reads F_g(x_g) = V and KCL sum_g J_g = (V - E) / R.

Why Newton is safe here
-----------------------
Seen from the bus, each group's current is a concave, falling function of V;
F_g is convex and rising in x. One Newton step on the joint system replaces
every group by its tangent (its Norton equivalent at the current point) and
solves that linear network exactly. Tangents of a concave curve lie above it,
so every step lands at or above the true bus voltage, and each x_g at or
above its true value: from the first step on, the iterates approach the
solution from one side and cannot overshoot. The only guard needed is a cap
on the first step (a tangent taken in the flat current-source region can aim
far above the open-circuit voltage).

References
----------
.. [1] J. W. Bishop, Solar Cells 25 (1988) 73-89, doi:10.1016/0379-6787(88)90059-2
       (diode-voltage form of the single-diode curve).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cached_property

import numpy as np

from pvsource.module import DiodeState, diode_current, diode_voltage_upper_bound

MAX_ITERATIONS = 100
STIFF_OHM = 1e-12
# Stop when KVL holds to this fraction of the bus voltage (plus 1 nV), then
# take one more step: quadratic convergence squares the error, far below
# what the 1e-9 energy-balance guard needs.
RELATIVE_TOLERANCE = 1e-8
ABSOLUTE_TOLERANCE_V = 1e-9
# Joint Newton steps for the maximum-power problem before a condition is
# handed to the slower nested solver.
JOINT_MPP_ITERATIONS = 30
# Below this fraction of conditions still iterating, gather them into smaller
# arrays rather than recompute the converged ones.
COMPACT_BELOW = 0.5


@dataclass(frozen=True)
class Network:
    """Groups and their wiring, as arrays the solver broadcasts over.

    Attributes
    ----------
    state : DiodeState
        Module parameters at each condition, arrays of shape (N, G).
    n_series, n_parallel : ndarray, shape (G,)
        Modules per string and strings per group.
    r_string_ohm, r_home_ohm : ndarray, shape (G,)
        Loop resistance of one string lead and of the group's home run [ohm].
    """

    state: DiodeState
    n_series: np.ndarray
    n_parallel: np.ndarray
    r_string_ohm: np.ndarray
    r_home_ohm: np.ndarray

    @property
    def shape(self):
        """(N, G): conditions by groups."""
        return np.broadcast_shapes(self.state.i_l_a.shape, self.state.a_v.shape, (len(self.n_series),))

    @cached_property
    def series_resistance_ohm(self):
        """Resistance per string between its diodes and the bus, shape (N, G) [ohm]."""
        return self.n_series * self.state.r_s_ohm + self.r_string_ohm + self.n_parallel * self.r_home_ohm

    def without_cables(self) -> "Network":
        """The same groups joined directly: the ideal array with no wiring."""
        zeros = np.zeros(len(self.n_series))
        return replace(self, r_string_ohm=zeros, r_home_ohm=zeros)

    @cached_property
    def prepared(self) -> "_Prepared":
        return _Prepared.build(self)


@dataclass(frozen=True)
class _Prepared:
    """Per-condition constants of the diode equation, group-major (G, M).

    Group-major so that sums over groups are plain additions of contiguous
    rows; computed once per network so each Newton step costs few passes.
    """

    i_l: np.ndarray
    i_o: np.ndarray
    i_l_plus_i_o: np.ndarray
    i_o_over_a: np.ndarray
    a: np.ndarray
    inv_a: np.ndarray
    g_sh: np.ndarray
    rt: np.ndarray
    x_oc: np.ndarray
    n_s: np.ndarray
    n_p: np.ndarray

    @classmethod
    def build(cls, net: Network) -> "_Prepared":
        shape = net.shape
        t = lambda a: np.ascontiguousarray(np.broadcast_to(a, shape).T, dtype=float)  # noqa: E731
        st = net.state
        a, i_o, i_l = t(st.a_v), t(st.i_o_a), t(st.i_l_a)
        with np.errstate(divide="ignore"):
            g_sh = 1.0 / t(st.r_sh_ohm)
        return cls(
            i_l=i_l, i_o=i_o, i_l_plus_i_o=i_l + i_o, i_o_over_a=i_o / a, a=a, inv_a=1.0 / a, g_sh=g_sh,
            rt=t(net.series_resistance_ohm), x_oc=t(diode_voltage_upper_bound(st)),
            n_s=np.asarray(net.n_series, float)[:, None], n_p=np.asarray(net.n_parallel, float)[:, None],
        )

    def take(self, idx) -> "_Prepared":
        keep = ("n_s", "n_p")
        return _Prepared(**{k: getattr(self, k) if k in keep else getattr(self, k)[:, idx]
                            for k in self.__dataclass_fields__})

    @property
    def v_oc_bound(self):
        """Upper bound of the open-circuit bus voltage, (M,) [V]."""
        return np.max(self.n_s * self.x_oc, axis=0)

    def x_at(self, v):
        """Diode voltages that put each group near bus voltage ``v`` (M,): a start, not a solution.

        Each string's current is estimated from its ideal-diode curve,
        I ~ I_L (1 - exp((V - n_s x_oc) / (n_s a))), and x = (V + I R_t) / n_s.
        """
        with np.errstate(over="ignore"):
            i = self.i_l * -np.expm1(np.minimum((v - self.n_s * self.x_oc) / (self.n_s * self.a), 50.0))
        return (v + i * self.rt) / self.n_s

    def open_circuit_estimate(self):
        """The array's open-circuit bus voltage for ideal diodes, (M,) [V].

        With I_g = I_L (1 - exp((V - Voc_g) / s)), zero total current gives
        V = -s ln(sum w_g exp(-Voc_g / s)): a soft minimum of the groups'
        open-circuit voltages, weighted by their currents w_g.
        """
        w = self.n_p * self.i_l
        total = _gsum(w)
        lit = total > 0.0
        share = w / np.where(lit, total, 1.0)
        scale = _gsum(share * self.n_s * self.a)
        voc = self.n_s * self.x_oc
        top = voc.max(axis=0)
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):  # dark rows: 0/0, masked below
            v = top - scale * np.log(_gsum(share * np.exp(np.minimum((top - voc) / scale, 700.0))))
        return np.where(lit, np.clip(v, voc.min(axis=0), top), 0.0)

    def x_cap(self, v_max, load_back_a=0.0, stiff_v=None):
        """Upper bounds on each group's diode voltage at the solution, (G, M) [V].

        Two bounds, both valid, and the tighter is kept:

        - above max(a ln(1 + I_L/I_0), v_max / n_s) a string's current is not
          positive and its bus voltage exceeds ``v_max``;
        - the current driven back into a string is limited by what the rest
          of the network can push: the other groups (at most n_p (I_L + I_0)
          each while the bus is not negative) plus ``load_back_a`` from the
          load; or, on a stiff bus at ``stiff_v``, stiff_v / R_t per string.
          The diode voltage at which that current flows backwards is
          a ln((I_L + I_0 + back) / I_0).

        Without the second bound a short string paralleled with a long one, or
        a bank far above Voc, would start Newton hundreds of volts to the right
        of the solution, from where it walks back only about ``a`` per step.
        """
        cap = np.maximum(self.x_oc, v_max / self.n_s)
        supply = self.n_p * (self.i_l + self.i_o)
        back = (_gsum(supply) - supply + load_back_a) / self.n_p
        with np.errstate(divide="ignore", invalid="ignore"):
            if stiff_v is not None:
                back = np.where(np.isfinite(stiff_v), np.maximum(stiff_v, 0.0) / self.rt, back)
            cap_current = self.a * np.log((self.i_l + self.i_o + back) / self.i_o)
        return np.minimum(cap, np.where(np.isnan(cap_current), cap, cap_current))


def _evaluate(p: _Prepared, x, second=False):
    """Group quantities at diode voltages x (G, M'): bus voltage F, dF/dx,
    group current J, conductance -dJ/dV seen from the bus and, if asked, d2J/dV2."""
    e = np.exp(x * p.inv_a)
    e *= p.i_o_over_a
    minus_di = e + p.g_sh
    i = p.i_l_plus_i_o - p.a * e
    i -= x * p.g_sh
    dbus = minus_di * p.rt
    dbus += p.n_s
    bus = p.n_s * x
    bus -= i * p.rt
    cond = minus_di * p.n_p
    cond /= dbus
    j = p.n_p * i
    if not second:
        return bus, dbus, j, cond
    d2j = e * (p.inv_a * p.n_p * p.n_s)
    d2j /= -(dbus * dbus * dbus)
    return bus, dbus, j, cond, d2j


@dataclass(frozen=True)
class GroupPoint:
    """Every group evaluated at given diode voltages, shape (N, G).

    Attributes
    ----------
    x_v : module diode voltage [V]
    module_i_a, di_dx : module current [A] and dI/dx [A/V]
    module_v : module terminal voltage x - I R_s [V]
    bus_v : the bus voltage this point implies, F(x) [V]
    group_i_a : group current J [A]
    conductance_s : -dJ/dV seen from the bus [S]
    """

    x_v: np.ndarray
    module_i_a: np.ndarray
    di_dx: np.ndarray
    module_v: np.ndarray
    bus_v: np.ndarray
    group_i_a: np.ndarray
    conductance_s: np.ndarray


def evaluate_groups(net: Network, x_v) -> GroupPoint:
    """Evaluate every group at module diode voltages ``x_v`` (N, G)."""
    i, di, _ = diode_current(x_v, net.state)
    rt = net.series_resistance_ohm
    dbus = net.n_series - di * rt
    return GroupPoint(
        x_v=x_v, module_i_a=i, di_dx=di, module_v=x_v - i * net.state.r_s_ohm,
        bus_v=net.n_series * x_v - i * rt, group_i_a=net.n_parallel * i,
        conductance_s=-net.n_parallel * di / dbus,
    )


@dataclass(frozen=True)
class Solution:
    """A solved network.

    Attributes
    ----------
    x_v : ndarray (N, G)
        Module diode voltage in each group [V].
    bus_v : ndarray (N,)
        Combiner-bus voltage [V].
    converged : ndarray of bool (N,)
    iterations : int
        Newton steps taken by the slowest condition.
    """

    x_v: np.ndarray
    bus_v: np.ndarray
    converged: np.ndarray
    iterations: int


def _tolerance(v):
    return RELATIVE_TOLERANCE * np.abs(v) + ABSOLUTE_TOLERANCE_V


def _flat(value, m):
    return np.array(np.broadcast_to(np.asarray(value, float).reshape(-1) if np.ndim(value) else value, (m,)))


def _iterate(p: _Prepared, step, max_iterations=None):
    """Call ``step(q, idx)`` until every condition reports done.

    ``idx`` selects columns of the caller's full-size arrays and ``q`` holds
    the prepared constants of the same columns. While more than half are
    still active, the step runs on all columns of the current set (an extra
    Newton step at a converged point leaves it there) because gathering the
    active ones costs more than it saves; below half, the active ones are
    gathered into smaller arrays once.
    """
    max_iterations = MAX_ITERATIONS if max_iterations is None else min(max_iterations, MAX_ITERATIONS)
    m = p.i_l.shape[1]
    converged = np.zeros(m, bool)
    q, members = p, None  # members: full-array indices of q's columns (None: all)
    active = np.ones(m, bool)  # over q's columns
    iteration = 0
    for iteration in range(1, max_iterations + 1):
        n_active = int(active.sum())
        if n_active < COMPACT_BELOW * active.size:
            local = np.flatnonzero(active)
            q = q.take(local)
            members = local if members is None else members[local]
            active = np.ones(local.size, bool)
        done = step(q, slice(None) if members is None else members)
        newly = active & done
        converged[newly if members is None else members[newly]] = True
        active &= ~done
        if not active.any():
            break
    return converged, iteration


def _gsum(a):
    """Sum over groups (axis 0); explicit for one or two groups, the common cases."""
    if a.shape[0] == 1:
        return a[0]
    if a.shape[0] == 2:
        return a[0] + a[1]
    return a.sum(axis=0)


def _gall(a):
    """All over groups (axis 0)."""
    if a.shape[0] == 1:
        return a[0]
    if a.shape[0] == 2:
        return a[0] & a[1]
    return a.all(axis=0)


def _result(net: Network, x, v, converged, iterations) -> Solution:
    return Solution(np.ascontiguousarray(x.T).reshape(net.shape), v.reshape(net.shape[:-1]),
                    converged.reshape(net.shape[:-1]), iterations)


def solve_thevenin(net: Network, emf_v, r_ohm, x0_v=None) -> Solution:
    """Operating point of the array feeding a Thevenin branch (E, R) from its bus.

    Parameters
    ----------
    net : Network
    emf_v : float or array (N,)
        EMF of the branch; opposes the array's current [V].
    r_ohm : float or array (N,)
        Branch resistance [ohm]: ``np.inf`` is an open circuit, 0 fixes the
        bus voltage at ``emf_v``.
    x0_v : array (N, G), optional
        Starting diode voltages; by default a start from the current-source
        estimate of the operating point.

    Returns
    -------
    Solution
    """
    p = net.prepared
    m = p.i_l.shape[1]
    emf, r = _flat(emf_v, m), _flat(r_ohm, m)
    # Below a picohm a branch is a stiff voltage for all purposes (and its
    # conductance would overflow).
    fixed = r < STIFF_OHM
    with np.errstate(divide="ignore", over="ignore"):
        g_load = np.where(fixed, 0.0, 1.0 / np.where(fixed, 1.0, r))
    v_oc = p.v_oc_bound
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        load_back = np.where(fixed | ~np.isfinite(r), 0.0, np.maximum(emf, 0.0) / r)
    x_hi = p.x_cap(np.maximum(v_oc, emf), load_back, np.where(fixed, emf, np.nan))
    if x0_v is None:
        # Current-source estimate: every string near I_L, so V ~ E + R sum(I_L),
        # never above the open-circuit bound.
        with np.errstate(invalid="ignore"):
            v0 = np.minimum(emf + r * _gsum(p.n_p * p.i_l), v_oc)
        v0 = np.where(fixed, emf, np.where(np.isfinite(v0), v0, v_oc))
        x = np.minimum((v0 + p.i_l * p.rt) / p.n_s, p.x_oc)
        open_ = ~np.isfinite(r)
        if open_.any() and p.n_s.shape[0] > 1:
            # Mismatched groups settle near the soft minimum of their Vocs.
            x = np.where(open_, np.minimum(p.x_at(p.open_circuit_estimate()), x_hi), x)

    else:
        x = np.minimum(np.asarray(x0_v, float).reshape(m, -1).T, x_hi)
    v = np.empty(m)

    def step(q, idx):
        bus, dbus, j, cond = _evaluate(q, x[:, idx])
        e = emf[idx]
        norton = _gsum(j + cond * bus)
        vs = np.where(fixed[idx], e, (norton + g_load[idx] * e) / (_gsum(cond) + g_load[idx]))
        resid = vs - bus
        x[:, idx] = np.minimum(x[:, idx] + resid / dbus, x_hi[:, idx])
        v[idx] = vs
        return _gall(np.abs(resid) <= _tolerance(vs))

    converged, iterations = _iterate(p, step)
    return _result(net, x, v, converged, iterations)


def solve_at_bus_voltage(net: Network, bus_v, x0_v=None, relative_tolerance=RELATIVE_TOLERANCE) -> Solution:
    """Diode voltages that put every group at the given bus voltage.

    Each group's F(x) is convex and rising, so Newton from the right cannot
    overshoot, and from the left it lands on the right after one step (capped).
    ``relative_tolerance`` may be loosened where fewer digits are needed.
    """
    p = net.prepared
    m = p.i_l.shape[1]
    v = _flat(bus_v, m)
    x_hi = p.x_cap(np.maximum(v, p.v_oc_bound), 0.0, v)
    if x0_v is None:
        x = np.minimum((v + p.i_l * p.rt) / p.n_s, x_hi)
    else:
        x = np.minimum(np.asarray(x0_v, float).reshape(m, -1).T, x_hi)

    def step(q, idx):
        bus, dbus, _, _ = _evaluate(q, x[:, idx])
        vs = v[idx]
        resid = vs - bus
        x[:, idx] = np.minimum(x[:, idx] + resid / dbus, x_hi[:, idx])
        return _gall(np.abs(resid) <= relative_tolerance * np.abs(vs) + ABSOLUTE_TOLERANCE_V)

    converged, iterations = _iterate(p, step)
    return _result(net, x, v, converged, iterations)


def _power_slope(i, di, d2i, v, r_f):
    """dP/dV and d2P/dV2 of P = (V - I R_f) I, with I(V) and its derivatives."""
    slope = i + v * di - 2.0 * r_f * i * di
    curvature = 2.0 * di + v * d2i - 2.0 * r_f * (di * di + i * d2i)
    return slope, curvature


def solve_max_power(net: Network, r_feeder_ohm=0.0, open_circuit: Solution | None = None,
                    x0_v=None, relative_tolerance=RELATIVE_TOLERANCE) -> Solution:
    """Bus voltage that maximises the power delivered through the feeder.

    This is what a maximum-power tracker at the far end of the feeder does:
    P = (V - I R_f) I is maximised over the bus voltage V in [0, Voc].
    A joint Newton step moves V by Newton on dP/dV, with each group's current
    and slope carried to V by its Taylor expansion, and moves each group's
    diode voltage toward V; a step that leaves the bracket or meets positive
    curvature is replaced by bisection. Conditions that have not converged
    after a few steps finish in a nested solver (exact inner solve per step).

    Parameters
    ----------
    net : Network
    r_feeder_ohm : float or array (N,)
        Loop resistance between the bus and the load [ohm].
    open_circuit : Solution, optional
        The network's open-circuit solution, if already known.
    x0_v : array (N, G), optional
        Starting diode voltages (each group's own MPP is a good start); by
        default the ideal-diode estimate x_oc - a ln(1 + x_oc / a).
    relative_tolerance : float
        On the bus voltage. Power is flat at its maximum, so 1e-6 still gives
        P to about 1e-12; the matching ratio needs the default.
    """
    oc = open_circuit if open_circuit is not None else solve_thevenin(net, 0.0, np.inf)
    p = net.prepared
    m = p.i_l.shape[1]
    r_f = _flat(r_feeder_ohm, m)
    v_oc = oc.bus_v.reshape(m)
    lit = (p.i_l > 0.0).any(axis=0) & (v_oc > 0.0)
    lo = np.zeros(m)
    hi = np.where(lit, v_oc, 0.0)
    x_oc = np.ascontiguousarray(oc.x_v.reshape(m, -1).T)
    # Ideal-diode MPP: exp(x/a)(1 + x/a) = I_L/I_0 + 1, so x_mp ~ x_oc - a ln(1 + x_oc/a).
    if x0_v is None:
        # The array as one ideal diode of the current-weighted scale s:
        # Vmp ~ Voc - s ln(1 + Voc / s); every group starts at that voltage.
        w = p.n_p * p.i_l
        total = _gsum(w)
        s_scale = _gsum(w * p.n_s * p.a) / np.where(total > 0, total, 1.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            v = np.where(lit, v_oc - s_scale * np.log1p(v_oc / s_scale), 0.0)
        v = np.clip(np.nan_to_num(v), lo, hi)
        x = np.where(lit, np.minimum(p.x_at(v), x_oc + 50.0 * p.a), x_oc)
    else:
        x = np.where(lit, np.minimum(np.asarray(x0_v, float).reshape(m, -1).T, x_oc), x_oc)
        bus, _, j, _ = _evaluate(p, x)
        with np.errstate(invalid="ignore", divide="ignore"):
            v = np.where(lit, _gsum(j * bus) / _gsum(j), 0.0)
        v = np.clip(np.nan_to_num(v), lo, hi)
    x_hi = p.x_cap(hi)

    def step(q, idx):
        bus, dbus, j, cond, d2j = _evaluate(q, x[:, idx], second=True)
        vs, los, his, rf = v[idx], lo[idx], hi[idx], r_f[idx]
        dv = vs - bus
        i = _gsum(j - cond * dv)
        di = _gsum(d2j * dv - cond)
        d2i = _gsum(d2j)
        slope, curvature = _power_slope(i, di, d2i, vs, rf)
        tol = relative_tolerance * np.abs(vs) + ABSOLUTE_TOLERANCE_V
        # The bracket only trusts a slope taken with every group at V.
        consistent = _gall(np.abs(dv) <= 1e-6 * (np.abs(vs) + 1.0))
        los = np.where(consistent & (slope > 0), vs, los)
        his = np.where(consistent & (slope <= 0), vs, his)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = vs - slope / curvature
        ok = (curvature < 0) & (newton >= los) & (newton <= his)
        v_new = np.where(lit[idx], np.where(ok, newton, 0.5 * (los + his)), 0.0)
        done = (np.abs(v_new - vs) <= tol) & _gall(np.abs(dv) <= tol)
        x[:, idx] = np.minimum(x[:, idx] + (v_new - bus) / dbus, x_hi[:, idx])
        # With every condition active, idx is a slice and vs a view of v:
        # assign only after the last read.
        v[idx], lo[idx], hi[idx] = v_new, los, his
        return done

    converged, iterations = _iterate(p, step, JOINT_MPP_ITERATIONS)
    if not converged.all():
        rest = np.flatnonzero(~converged)
        nested = _solve_max_power_nested(subset_rows(net, rest), r_f[rest], x[:, rest].T, lo[rest], hi[rest])
        x[:, rest] = nested.x_v.T
        v[rest] = nested.bus_v
        converged[rest] = nested.converged
        iterations += nested.iterations
    converged &= oc.converged.reshape(m)
    return _result(net, x, v, converged, iterations + oc.iterations)


def subset_rows(net: Network, rows) -> Network:
    """The same network at a subset of its conditions (rows of the (N, G) state)."""
    g = net.shape[-1]
    st = net.state
    pick = lambda a: np.broadcast_to(a, net.shape).reshape(-1, g)[rows]  # noqa: E731
    return replace(net, state=DiodeState(*(pick(getattr(st, k)) for k in st.__dataclass_fields__)))


def _solve_max_power_nested(net: Network, r_f, x, lo, hi) -> Solution:
    """Safeguarded Newton on dP/dV with an exact inner solve at every step, (M, G)."""
    v = 0.5 * (lo + hi)
    inner = solve_at_bus_voltage(net, v, x)
    converged = np.zeros(v.shape, bool)
    iteration = 0
    for iteration in range(1, MAX_ITERATIONS + 1):
        _, _, j, cond, d2j = _evaluate(net.prepared, np.ascontiguousarray(inner.x_v.T), second=True)
        slope, curvature = _power_slope(_gsum(j), -_gsum(cond), _gsum(d2j), v, r_f)
        lo = np.where(slope > 0, v, lo)
        hi = np.where(slope > 0, hi, v)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = v - slope / curvature
        ok = (curvature < 0) & (newton >= lo) & (newton <= hi)
        v_new = np.where(ok, newton, 0.5 * (lo + hi))
        converged = (np.abs(v_new - v) <= _tolerance(v)) & inner.converged
        v = v_new
        inner = solve_at_bus_voltage(net, v, inner.x_v)
        if converged.all():
            break
    return Solution(inner.x_v, v, converged & inner.converged, iteration)


def solve_power_above_mpp(net: Network, p_target_w, r_feeder_ohm, v_lo, v_hi, x0_v=None) -> Solution:
    """Bus voltage above the maximum power point at which the load receives ``p_target_w``.

    What a tracker does when it must take less than the maximum: it moves its
    input toward Voc, where delivered power falls monotonically with voltage.
    Safeguarded Newton on P(V) - P_target in [v_lo, v_hi], with an exact inner
    solve of every group at each step.

    Parameters
    ----------
    net : Network
    p_target_w : array (N,)
        Power wanted at the far end of the feeder [W]; at most the power at ``v_lo``.
    r_feeder_ohm : float or array (N,)
        Loop resistance between bus and load [ohm].
    v_lo, v_hi : arrays (N,)
        Bracket: the maximum power point (or the lowest allowed voltage) and Voc [V].
    x0_v : array (N, G), optional
        Diode voltages at ``v_lo``.
    """
    shape = net.shape
    m = int(np.prod(shape[:-1]))
    target = _flat(p_target_w, m)
    r_f = _flat(r_feeder_ohm, m)
    lo, hi = _flat(v_lo, m), _flat(v_hi, m)
    v = 0.5 * (lo + hi)
    inner = solve_at_bus_voltage(net, v.reshape(shape[:-1]), x0_v)
    converged = np.zeros(m, bool)
    iteration = 0
    for iteration in range(1, MAX_ITERATIONS + 1):
        x = np.ascontiguousarray(inner.x_v.reshape(m, -1).T)
        _, _, j, cond = _evaluate(net.prepared, x)
        i, di = _gsum(j), -_gsum(cond)
        power = (v - i * r_f) * i
        slope = i + v * di - 2.0 * r_f * i * di
        above = power > target
        lo = np.where(above, v, lo)
        hi = np.where(above, hi, v)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = v - (power - target) / slope
        ok = (slope < 0) & (newton >= lo) & (newton <= hi)
        v_new = np.where(ok, newton, 0.5 * (lo + hi))
        converged = np.abs(power - target) <= 1e-9 * np.maximum(np.abs(target), 1.0)
        v = np.where(converged, v, v_new)
        if converged.all():
            break
        inner = solve_at_bus_voltage(net, v.reshape(shape[:-1]), inner.x_v)
    return Solution(inner.x_v, v.reshape(shape[:-1]), converged.reshape(shape[:-1]) & inner.converged, iteration)
