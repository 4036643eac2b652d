"""The charge controller between the array and the bank: one class per kind.

Three kinds, each a class chosen once when the system file is read
(:func:`make_controller`), with the same three methods:

- :meth:`~Controller.free`: what it would put into the bank with no limit,
  and where the array sits then; smooth in the bank's state of charge, so a
  season study can interpolate it on a grid;
- :meth:`~Controller.operate`: where the array sits when the bank takes a
  given (regulated) current;
- :meth:`~Controller.losses`: the watts of the point: stored, curtailed, in
  the controller, the bank-side cables and the bank.

The kinds:

- :class:`Direct` (``direct``): the array is wired to the bank, through an
  optional blocking diode (a constant forward drop); nothing regulates.
- :class:`Pwm` (``pwm``): a switch that stays closed while the bank is below
  its regulation voltage, then opens and closes fast enough to hold it
  there; averages are reported, the array's point is its on-state.
- :class:`Tracker` (``mppt``): a DC-DC converter that holds its input at the
  maximum power point of the array as seen through the input cables, within
  its input window, and delivers efficiency x input power at its output;
  asked for less, it moves its input toward Voc.

The base :class:`Controller` is a controller known only by its input limits
(for the design checks); it cannot charge. The limits themselves live in
:func:`pvsource.regulation.regulate`, not here.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import ClassVar

import numpy as np

from pvsource import regulation as reg
from pvsource.errors import InputError
from pvsource.network import evaluate_groups, solve_power_above_mpp, solve_thevenin, subset_rows

# Common practice for small and mid-size MPPT charge controllers: efficiency
# rises steeply at light load and peaks near half load; typical datasheet
# curves run from about 90 % at a tenth of rated power to 96-98 % near half.
DEFAULT_EFFICIENCY_CURVE = ((0.0, 0.80), (0.05, 0.88), (0.1, 0.92), (0.25, 0.96), (0.5, 0.97), (1.0, 0.96))


@dataclass(frozen=True)
class Free:
    """What a controller would give the bank with no limit, at each condition (arrays (N,) and (N, G)).

    Attributes
    ----------
    current_a : the charge current before any bank or controller limit [A]
    limit : what sets it, a :mod:`pvsource.regulation` limit code (source, dark, input window, over-voltage)
    x_v, bus_v, converged : the array's point at that current (a switch's on-state)
    open_circuit : the array at open circuit (trackers; None otherwise)
    available_w, output_w : a tracker's input power within its window and its output for it [W]
    """

    current_a: np.ndarray
    limit: np.ndarray
    x_v: np.ndarray
    bus_v: np.ndarray
    converged: np.ndarray
    open_circuit: object = None
    available_w: np.ndarray | None = None
    output_w: np.ndarray | None = None


@dataclass(frozen=True)
class Operated:
    """The array's point when the bank takes the regulated current.

    Attributes
    ----------
    x_v, bus_v, converged : the array's point (a switch's on-state)
    array_i_a : the array's current there [A]
    duty : the share of time a switch is closed; 1 for the others [-]
    reached : False where the controller could not deliver the asked
        current and gives its unlimited one instead
    """

    x_v: np.ndarray
    bus_v: np.ndarray
    converged: np.ndarray
    array_i_a: np.ndarray
    duty: np.ndarray
    reached: np.ndarray


@dataclass(frozen=True)
class Losses:
    """Where the watts of a charging point go, arrays (N,) [W]; ``input_v`` [V] at the controller's input."""

    input_v: np.ndarray
    stored_w: np.ndarray
    curtailed_w: np.ndarray
    controller_loss_w: np.ndarray
    bank_cable_loss_w: np.ndarray
    bank_internal_loss_w: np.ndarray


@dataclass(frozen=True)
class Controller:
    """A charge controller known by its input limits only (for the checks); the kinds below charge.

    Attributes
    ----------
    name : str
        A label for reports.
    max_input_v : float or None
        Highest PV input voltage the controller tolerates, open circuit at
        the coldest conditions included [V].
    min_input_v : float or None
        Lowest PV input voltage at which it still charges [V].
    max_output_a : float or None
        Output (charge) current limit [A].
    efficiency_curve : tuple of (fraction, efficiency)
        Tracker efficiency against output power as a fraction of rated power [-].
    rated_power_w : float or None
        Rated output power; by default max_output_a times the bank's
        absorption voltage [W].
    min_headroom_v : float
        Tracker: the input must stay this far above the output voltage [V].
    diode_drop_v : float
        Direct and PWM: forward drop of a blocking diode, 0 if none [V].
    max_input_isc_a : float or None
        Largest PV short-circuit current the input accepts [A] (checked against 1.25 x the array's Isc).
    """

    #: The system file's spelling of the kind; None for input limits only.
    kind: ClassVar[str | None] = None
    #: Holds its input at the array's maximum power point (a converter).
    tracks: ClassVar[bool] = False
    #: Limits the charge current (the bank's limits apply); a wire does not.
    regulates: ClassVar[bool] = False

    name: str = ""
    max_input_v: float | None = None
    min_input_v: float | None = None
    max_output_a: float | None = None
    efficiency_curve: tuple = DEFAULT_EFFICIENCY_CURVE
    rated_power_w: float | None = None
    min_headroom_v: float = 2.0
    diode_drop_v: float = 0.0
    max_input_isc_a: float | None = None

    @property
    def output_limit_a(self) -> float:
        """The output current limit the regulation applies [A]; infinite if none."""
        return np.inf if self.max_output_a is None else float(self.max_output_a)

    def free(self, net, bank, r_feeder_ohm: float, r_bank_cables_ohm: float, array=None) -> Free:
        """The charge current before any bank or controller limit, and the array's point then."""
        raise InputError("controller", "kind", "a controller with input limits only cannot charge a bank; "
                                               "give kind = direct, pwm or mppt")

    def operate(self, net, free: Free, bank, i_bank_a, r_feeder_ohm: float, r_bank_cables_ohm: float) -> Operated:
        """The array's point when the bank takes ``i_bank_a`` (at most ``free.current_a``)."""
        raise NotImplementedError

    def losses(self, free: Free, op: Operated, bank, i_bank_a, r_feeder_ohm: float,
               r_bank_cables_ohm: float) -> Losses:
        """Where the watts go at that point."""
        raise NotImplementedError


@dataclass(frozen=True)
class _Switched(Controller):
    """A wire or a switch: the array sees the bank's EMF through the cables and a diode drop."""

    def free(self, net, bank, r_feeder_ohm, r_bank_cables_ohm, array=None) -> Free:
        v_d = self.diode_drop_v
        sol = solve_thevenin(net, bank.emf_v + v_d, bank.r_ohm + r_bank_cables_ohm + r_feeder_ohm)
        i_on = evaluate_groups(net, sol.x_v).group_i_a.sum(axis=-1)
        x, bus, converged = sol.x_v, sol.bus_v, sol.converged
        blocked = i_on < 0.0
        if (self.regulates or v_d > 0.0) and blocked.any():
            # A diode or an open switch stops the bank feeding the array: it rests at open circuit.
            oc = solve_thevenin(net, 0.0, np.inf)
            x = np.where(blocked[:, None], oc.x_v, x)
            bus = np.where(blocked, oc.bus_v, bus)
            converged = converged & (oc.converged | ~blocked)
            i_on = np.where(blocked, 0.0, i_on)
        dark = net.state.i_l_a.sum(axis=-1) <= 0.0
        limit = np.where(dark & (i_on <= 0.0), reg.DARK, reg.SOURCE)
        return Free(i_on, limit, x, bus, converged)

    def operate(self, net, free, bank, i_bank_a, r_feeder_ohm, r_bank_cables_ohm) -> Operated:
        # A regulating switch opens part of the time: the on-state current times the duty.
        with np.errstate(divide="ignore", invalid="ignore"):
            duty = np.where(free.current_a > i_bank_a, i_bank_a / free.current_a, 1.0)
        return Operated(free.x_v, free.bus_v, free.converged, free.current_a, duty, np.ones(duty.shape, bool))

    def losses(self, free, op, bank, i_bank_a, r_feeder_ohm, r_bank_cables_ohm) -> Losses:
        i_on, duty, room = free.current_a, op.duty, bank.room_a()
        stored = np.minimum(i_bank_a, room)
        return Losses(
            input_v=free.bus_v - i_on * r_feeder_ohm,
            # Past full, a direct connection's charge cannot be stored: it
            # heats (and, in lead-acid, gasses) the bank.
            stored_w=bank.emf_v * stored,
            # A switch that is open part of the time leaves that share of the on-state power on the curve.
            curtailed_w=(1.0 - duty) * np.maximum(free.bus_v * i_on, 0.0),
            controller_loss_w=self.diode_drop_v * np.maximum(duty * i_on, 0.0),
            bank_cable_loss_w=duty * i_on * i_on * r_bank_cables_ohm,
            bank_internal_loss_w=duty * i_on * i_on * bank.r_ohm + bank.emf_v * np.maximum(i_bank_a - stored, 0.0),
        )


@dataclass(frozen=True)
class Direct(_Switched):
    """The array wired to the bank, through an optional blocking diode; nothing regulates."""

    kind: ClassVar[str] = "direct"


@dataclass(frozen=True)
class Pwm(_Switched):
    """A switch that holds the bank at its regulation voltage by opening part of the time."""

    kind: ClassVar[str] = "pwm"
    regulates: ClassVar[bool] = True


@dataclass(frozen=True)
class Tracker(Controller):
    """A maximum-power-point tracking converter (``kind = "mppt"``)."""

    kind: ClassVar[str] = "mppt"
    tracks: ClassVar[bool] = True
    regulates: ClassVar[bool] = True

    def rated_w(self, bank):
        """The power the efficiency curve's load fractions refer to [W].

        ``rated_power_w``, or else the maximum output current at the bank's
        absorption voltage (a rating, whatever the stage).
        """
        if self.rated_power_w is not None:
            return self.rated_power_w
        if self.max_output_a is None:
            raise InputError("controller", "max_output_a", "a tracking controller needs max_output_a or rated_power_w")
        return self.max_output_a * np.maximum(bank.absorption_v, 1.0)

    def free(self, net, bank, r_feeder_ohm, r_bank_cables_ohm, array=None) -> Free:
        from pvsource.charging import array_side

        oc, mp = array if array is not None else array_side(net, r_feeder_ohm)
        r_f = r_feeder_ohm
        i_mp = evaluate_groups(net, mp.x_v).group_i_a.sum(axis=-1)
        # The input window: above the bank voltage by the headroom, and above
        # the controller's own minimum.
        v_in_min = np.maximum(bank.emf_v + self.min_headroom_v, self.min_input_v or 0.0)
        low = mp.bus_v - i_mp * r_f < v_in_min
        x, bus, converged = mp.x_v, mp.bus_v, mp.converged & oc.converged
        if low.any():
            held = solve_thevenin(net, v_in_min, r_f)
            x = np.where(low[:, None], held.x_v, x)
            bus = np.where(low, held.bus_v, bus)
            converged = converged & (held.converged | ~low)
        i_in = evaluate_groups(net, x).group_i_a.sum(axis=-1)
        dead = i_in <= 0.0  # the window lies above what the array can reach
        # Above its maximum input voltage a controller shuts down (if it
        # survives). It sees the array's open-circuit voltage at every
        # start-up, whatever it would draw afterwards.
        over_v = np.zeros_like(dead) if self.max_input_v is None else oc.bus_v > self.max_input_v
        off = dead | over_v
        if off.any():
            # The converter draws nothing: the array rests at open circuit.
            x = np.where(off[:, None], oc.x_v, x)
            bus = np.where(off, oc.bus_v, bus)
            i_in = np.where(off, 0.0, i_in)
        available = np.where(off, 0.0, (bus - i_in * r_f) * i_in)
        output = efficiency_at(self, available / self.rated_w(bank)) * available
        current = np.where(off, 0.0, _quadratic_current(output, bank.emf_v, bank.r_ohm + r_bank_cables_ohm))
        dark = oc.bus_v <= self.min_headroom_v  # no usable light at all
        limit = np.select([over_v, dead & dark, dead | low], [reg.INPUT_OVER_MAX, reg.DARK, reg.INPUT_WINDOW],
                          reg.SOURCE)
        return Free(current, limit, x, bus, converged, oc, available, output)

    def operate(self, net, free, bank, i_bank_a, r_feeder_ohm, r_bank_cables_ohm) -> Operated:
        rated = self.rated_w(bank)
        limited = i_bank_a < free.current_a
        p_out = (bank.emf_v + i_bank_a * (bank.r_ohm + r_bank_cables_ohm)) * i_bank_a
        # Input power that gives this output, with the efficiency taken at the
        # input's own load fraction (a few fixed-point steps; the curve is
        # flat enough), and never more than is available.
        p_in = p_out / efficiency_at(self, p_out / rated)
        for _ in range(8):
            p_in = p_out / efficiency_at(self, p_in / rated)
        # Where even all that is available would not give the asked current
        # (the curve's rising part can make the smaller output cost more
        # input), the source binds: the tracker stays at its maximum.
        reached = ~limited | (p_in < free.available_w)
        cut = limited & reached
        x, bus, converged = free.x_v, free.bus_v, free.converged
        rows = np.flatnonzero(cut & (p_in > 0))
        oc = free.open_circuit
        if rows.size:
            # Take less: move the input toward Voc until it delivers what is needed.
            sub = subset_rows(net, rows)
            sol = solve_power_above_mpp(sub, p_in[rows], r_feeder_ohm, bus[rows], oc.bus_v[rows], x[rows])
            x, bus, converged = x.copy(), bus.copy(), converged.copy()
            x[rows], bus[rows] = sol.x_v, sol.bus_v
            converged[rows] &= sol.converged
        idle = np.flatnonzero(cut & (p_in <= 0))
        if idle.size:
            x, bus = x.copy(), bus.copy()
            x[idle], bus[idle] = oc.x_v[idle], oc.bus_v[idle]
        i_in = np.where(free.current_a <= 0.0, 0.0, evaluate_groups(net, x).group_i_a.sum(axis=-1))
        return Operated(x, bus, converged, i_in, np.ones(bus.shape), reached)

    def losses(self, free, op, bank, i_bank_a, r_feeder_ohm, r_bank_cables_ohm) -> Losses:
        i_in = op.array_i_a
        p_in = (op.bus_v - i_in * r_feeder_ohm) * i_in
        p_out = (bank.emf_v + i_bank_a * (bank.r_ohm + r_bank_cables_ohm)) * i_bank_a
        return Losses(
            input_v=op.bus_v - i_in * r_feeder_ohm,
            stored_w=bank.emf_v * i_bank_a,
            curtailed_w=np.maximum(free.available_w - p_in, 0.0),
            controller_loss_w=p_in - p_out,
            bank_cable_loss_w=i_bank_a * i_bank_a * r_bank_cables_ohm,
            bank_internal_loss_w=i_bank_a * i_bank_a * bank.r_ohm,
        )


def _quadratic_current(p_out_w, emf_v, r_ohm):
    """Current I >= 0 with (E + I R) I = P: the bank current a converter output power drives."""
    p = np.maximum(p_out_w, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        root = 2.0 * p / (emf_v + np.sqrt(emf_v * emf_v + 4.0 * r_ohm * p))
    return np.where(p > 0.0, root, 0.0)


#: The classes by the system file's ``kind``.
KINDS = {cls.kind: cls for cls in (Direct, Pwm, Tracker)}


def make_controller(kind: str | None, **fields) -> Controller:
    """The controller class of ``kind`` (one of :data:`KINDS`, or None for input limits only)."""
    return (Controller if kind is None else KINDS[kind])(**fields)


def with_kind(controller: Controller, kind: str) -> Controller:
    """The same controller's settings as another kind."""
    return make_controller(kind, **asdict(controller))


def efficiency_at(controller: Controller, output_fraction):
    """Tracker efficiency at an output power given as a fraction of rated power [-].

    Linear interpolation in the controller's curve, held flat beyond its ends.
    """
    frac, eta = np.array(controller.efficiency_curve, dtype=float).T
    return np.interp(np.asarray(output_fraction, float), frac, eta)
