"""A backup generator that carries the load and charges the bank when the state of charge runs low.

The generator is described by when it runs and what it costs:

- it starts when the bank's state of charge falls to ``start_soc`` and runs
  until it reaches ``stop_soc``, and at least ``min_run_h`` hours (the time
  loop in :mod:`pvsource.season` keeps the running flag and the run time);
- while it runs it supplies the load directly and drives a battery charger
  that puts a direct current into the bank: ``charger_current_a``, or
  ``charger_power_w`` divided by the bank voltage;
- its fuel use depends on its load fraction: a constant rate, a measured
  curve against the load fraction, or the linear law below.

The charger comes after the array: the array's charge is the bank's first,
and the charger tops it up to the bank's own charge limit. With a rated
power, the charger takes only what the load leaves of it (the power sharing
that generator-fed chargers do, common practice).

Fuel: a diesel generator's consumption is close to a straight line in its
output power, with an intercept at no load that scales with its size:

    F = (F_idle * P_rated + F_slope * P_out) [l/h], P in kW

with F_idle = 0.08145 l/h per kW rated and F_slope = 0.246 l/kWh delivered
(Skarstein and Uhlen 1989, from memory; common practice for small diesel
sets). At full load this is 0.327 l/kWh, about 3 kWh per litre.

References
----------
.. [1] O. Skarstein and K. Uhlen, "Design considerations with respect to
   long-term diesel saving in wind/diesel plants", Wind Engineering 13(2),
   72-87, 1989 (the linear fuel law; coefficients from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Linear fuel law: litres per hour per kW of rated power, at no load (from memory, [1]).
FUEL_IDLE_L_PER_KWH_RATED = 0.08145
#: Linear fuel law: litres per kWh of output (from memory, [1]).
FUEL_SLOPE_L_PER_KWH = 0.246
#: Charger efficiency, AC in to DC out, when the file gives none (common practice, from memory: battery
#: chargers and inverter-chargers convert 85-93 % at rated current; the cautious end is taken).
DEFAULT_CHARGER_EFFICIENCY = 0.85
#: Highest ``stop_soc``: the bank's acceptance tapers to nothing at full charge, so a charge to
#: exactly full would never end (:func:`pvsource.bank.acceptance_current_a`).
MAX_STOP_SOC = 0.99

FUEL_MODELS = ("constant", "curve", "linear")


@dataclass(frozen=True)
class Generator:
    """A backup generator with its battery charger.

    Attributes
    ----------
    start_soc, stop_soc : float
        State of charge at which it starts, and to which it charges before it
        stops [fraction]; ``start_soc < stop_soc <= MAX_STOP_SOC``.
    charger_current_a : float or None
        The charger's DC current into the bank [A].
    charger_power_w : float or None
        The charger's DC power into the bank [W]; its current is this over
        the bank's voltage. Exactly one of the two charger values is set.
    charger_efficiency : float
        DC out over AC in of the charger [-].
    min_run_h : float
        Shortest run once started [h].
    rated_power_w : float or None
        The generator's rated output [W]; the load fraction of the fuel
        curve and of the linear law refers to it.
    fuel_l_per_h : float or None
        A constant fuel rate while running [l/h].
    fuel_curve : tuple of (fraction, l/h)
        Fuel rate against the load fraction, fractions rising; empty if not given.
    name : str
    """

    start_soc: float
    stop_soc: float
    charger_current_a: float | None = None
    charger_power_w: float | None = None
    charger_efficiency: float = DEFAULT_CHARGER_EFFICIENCY
    min_run_h: float = 0.0
    rated_power_w: float | None = None
    fuel_l_per_h: float | None = None
    fuel_curve: tuple = ()
    name: str = ""

    @property
    def fuel_model(self) -> str:
        """How fuel is counted: one of :data:`FUEL_MODELS`."""
        if self.fuel_l_per_h is not None:
            return "constant"
        return "curve" if self.fuel_curve else "linear"


def charger_limits(gen: Generator, load_w):
    """The charger's current limit [A] and the DC power it may deliver [W] while the generator carries ``load_w``.

    The power is the charger's own (``charger_power_w``, infinite when it is
    set by current) and, with a rated power, what the load leaves of the
    generator times the charger's efficiency (power sharing, common
    practice). A load above the rating leaves the charger nothing.

    Parameters
    ----------
    gen : Generator
    load_w : array_like
        Load the generator carries [W].

    Returns
    -------
    current_a : float
        [A], infinite when the charger is set by power.
    power_w : ndarray
        [W], the shape of ``load_w``.
    """
    load = np.asarray(load_w, dtype=float)
    current = np.inf if gen.charger_current_a is None else float(gen.charger_current_a)
    power = np.full(load.shape, np.inf if gen.charger_power_w is None else float(gen.charger_power_w))
    if gen.rated_power_w is not None:
        power = np.minimum(power, np.maximum(gen.rated_power_w - load, 0.0) * gen.charger_efficiency)
    return current, power


def charge_current_a(gen: Generator, bank_v, load_w=0.0):
    """The charger's DC current into the bank [A] at bank voltage ``bank_v`` [V].

    ``min(charger_current_a, P / bank_v)`` with P from :func:`charger_limits`;
    the bank's own charge limit is applied by the time loop, after the array.
    """
    current, power = charger_limits(gen, load_w)
    v = np.asarray(bank_v, dtype=float)
    with np.errstate(divide="ignore"):
        return np.minimum(current, np.where(v > 0.0, power / v, 0.0))


def output_w(gen: Generator, load_w, charge_w):
    """The generator's output [W]: the load it carries and what its charger draws to deliver ``charge_w`` [W] DC."""
    return np.asarray(load_w, dtype=float) + np.asarray(charge_w, dtype=float) / gen.charger_efficiency


def fuel_at_fraction_l_per_h(gen: Generator, load_fraction):
    """Fuel used per hour of running [l/h] at a load fraction (output over ``rated_power_w``) [-].

    - a constant ``fuel_l_per_h``: that, whatever the load;
    - a ``fuel_curve``: linear interpolation in the load fraction, held at
      its first value below the first point (a set never burns less than at
      its lightest measured load) and at its last value above the last (an
      overload is not extrapolated);
    - otherwise the linear law of the module docstring ([1], from memory):
      ``rated_kW * (0.08145 + 0.246 * fraction)``.

    Parameters
    ----------
    gen : Generator
    load_fraction : array_like
        Output over rated power [-].

    Returns
    -------
    ndarray
        [l/h], the shape of ``load_fraction``.
    """
    x = np.asarray(load_fraction, dtype=float)
    if gen.fuel_l_per_h is not None:
        return np.full(x.shape, float(gen.fuel_l_per_h))
    if gen.fuel_curve:
        frac, rate = np.array(gen.fuel_curve, dtype=float).T
        return np.interp(x, frac, rate)
    return gen.rated_power_w / 1000.0 * (FUEL_IDLE_L_PER_KWH_RATED + FUEL_SLOPE_L_PER_KWH * x)


def fuel_rate_l_per_h(gen: Generator, output):
    """Fuel used per hour of running [l/h] at generator output ``output`` [W] (:func:`fuel_at_fraction_l_per_h`)."""
    p = np.asarray(output, dtype=float)
    if gen.rated_power_w is None:
        return np.full(p.shape, float(gen.fuel_l_per_h))  # only a constant rate needs no rating
    return fuel_at_fraction_l_per_h(gen, p / gen.rated_power_w)


def step_accounts(gen: Generator, running, charge_a, load_w, emf_v, r_ohm, array_a) -> dict:
    """Each step's generator energy, split the way the bank and the load see it (step means, [W] and [l/h]).

    The charger's current adds to the array's in the bank; its share of the
    bank's resistive loss is what it adds to it,
    ``R ((I_a + I_g)^2 - I_a^2) = R I_g (I_g + 2 I_a)``, so the array's own
    accounting stands unchanged (the array comes first).

    Parameters
    ----------
    gen : Generator
    running : array (N,)
        Fraction of each step the generator ran [-].
    charge_a : array (N,)
        The charger's current into the bank, averaged over the step [A].
    load_w : array (N,)
        The load [W]; the generator carries it while it runs.
    emf_v, r_ohm : array (N,)
        The bank's EMF [V] and internal resistance [ohm].
    array_a : array (N,)
        The array's charge current into the bank [A].

    Returns
    -------
    dict of arrays (N,)
        ``generator_w`` (output), ``generator_load_w`` (load carried),
        ``generator_charger_loss_w``, ``generator_bank_loss_w``,
        ``generator_stored_w`` (EMF x current), ``generator_charge_a`` and
        ``generator_fuel_l_per_h``; ``generator_w`` is the sum of the four
        parts that follow it.
    """
    running = np.asarray(running, dtype=float)
    mean_a = np.asarray(charge_a, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        on_a = np.where(running > 0.0, mean_a / running, 0.0)  # the current while it runs
    stored = np.asarray(emf_v, dtype=float) * mean_a
    bank_loss = np.asarray(r_ohm, dtype=float) * mean_a * (on_a + 2.0 * np.asarray(array_a, dtype=float))
    charger_loss = (stored + bank_loss) * (1.0 / gen.charger_efficiency - 1.0)
    carried = running * np.asarray(load_w, dtype=float)
    total = carried + charger_loss + bank_loss + stored
    with np.errstate(invalid="ignore", divide="ignore"):
        on_w = np.where(running > 0.0, total / running, 0.0)  # the output while it runs
    fuel = np.where(running > 0.0, running * fuel_rate_l_per_h(gen, on_w), 0.0)
    return {"generator_w": total, "generator_load_w": carried, "generator_charger_loss_w": charger_loss,
            "generator_bank_loss_w": bank_loss, "generator_stored_w": stored, "generator_charge_a": mean_a,
            "generator_fuel_l_per_h": fuel}
