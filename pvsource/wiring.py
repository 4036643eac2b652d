"""Cable runs and where they sit in the circuit.

A run is a two-conductor DC circuit: its loop resistance is twice the one-way
route length times the resistance of one conductor per length, divided by the
conductors in parallel on each pole. Its role places it in the network:

- ``string``: the lead of every string in one group (each string has its own);
- ``home-run``: from a group to the combiner bus;
- ``feeder``: from the combiner bus to the controller (or the load);
- ``bank``: from the controller to the battery bank;
- ``interconnect``: between the bank's terminals and its cells or batteries.

With several controllers each has its own feeder and bank runs (named by
``controller``); the string leads and home runs follow their group's
controller, and the interconnects carry every controller's current together.

Until a controller is modelled, feeder, bank and interconnect runs carry the
same current in series between the bus and the load.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from pvsource import conductors
from pvsource.ampacity import (DEFAULT_BATTERY_PROTECTION, DEFAULT_PROTECTION, Ampacity, Installation, ampacity,
                               protection_words)
from pvsource.conductors import ConductorSize
from pvsource.errors import InputError

PV_SIDE_ROLES = ("string", "home-run", "feeder")
BATTERY_SIDE_ROLES = ("bank", "interconnect")
ROLES = (*PV_SIDE_ROLES, *BATTERY_SIDE_ROLES)
GROUP_ROLES = ("string", "home-run")


@dataclass(frozen=True)
class CableRun:
    """One cable run.

    Attributes
    ----------
    name : str
        A label for reports.
    role : str
        One of :data:`ROLES`.
    length_m : float
        One-way route length [m].
    resistance_ohm_per_km : float
        Resistance of one conductor per km at its temperature [ohm/km]:
        computed from the size, or given by the user (which then wins).
    group : str or None
        The group a ``string`` or ``home-run`` run belongs to.
    conductors_in_parallel : int
        Conductors sharing each pole.
    size : ConductorSize or None
        The conductor size, if given.
    material : str
        ``copper`` or ``aluminium``.
    temp_c : float
        Conductor temperature used for the resistance [degC].
    conductor_class : int
        IEC 60228 class: 1 solid, 2 stranded, 5 flexible.
    ampacity_a : float or None
        The conductor's current rating, if the user gives one [A].
    resistance_basis : str
        ``"table"`` (the size's standard: IEC 60228 or NEC Chapter 9 Table 8)
        or ``"computed"`` (first principles); see :func:`pvsource.conductors.size_resistance`.
    resistance_source : str
        Where ``resistance_ohm_per_km`` came from, in words.
    installed : tuple of (str, object)
        The installation fields the file gives for this run (insulation_c,
        ambient_c, conductors_together, install, termination_c); the rest take
        the defaults of :class:`pvsource.ampacity.Installation` or of the command.
    fuse_a, fuse_interrupting_a : float or None
        The overcurrent device protecting this run: its rating and its
        interrupting rating [A], if given.
    controller : str or None
        With several controllers, the one a ``feeder`` or ``bank`` run
        serves; None otherwise.
    """

    name: str
    role: str
    length_m: float
    resistance_ohm_per_km: float
    group: str | None = None
    conductors_in_parallel: int = 1
    size: ConductorSize | None = None
    material: str = "copper"
    temp_c: float = 75.0
    conductor_class: int = 2
    ampacity_a: float | None = None
    resistance_basis: str = "table"
    resistance_source: str = ""
    installed: tuple = ()
    fuse_a: float | None = None
    fuse_interrupting_a: float | None = None
    controller: str | None = None

    @property
    def loop_resistance_ohm(self) -> float:
        """Out-and-back resistance of the run [ohm]."""
        return 2.0 * self.length_m * self.resistance_ohm_per_km / 1000.0 / self.conductors_in_parallel


@dataclass(frozen=True)
class GroupWiring:
    """Loop resistances per group and on the load side, in the solver's form.

    Attributes
    ----------
    r_string_ohm : ndarray, shape (G,)
        Loop resistance of the lead of one string in each group [ohm].
    r_home_ohm : ndarray, shape (G,)
        Loop resistance of each group's home run [ohm].
    r_feeder_ohm : float
        Loop resistance of the feeder runs, bus to controller [ohm].
    r_bank_ohm : float
        Loop resistance of the bank and interconnect runs [ohm].
    """

    r_string_ohm: np.ndarray
    r_home_ohm: np.ndarray
    r_feeder_ohm: float
    r_bank_ohm: float

    @property
    def r_load_side_ohm(self) -> float:
        """All resistance in series between the bus and the load [ohm]."""
        return self.r_feeder_ohm + self.r_bank_ohm


def sized_ohm_per_km(run: CableRun, size: ConductorSize) -> tuple[float, str]:
    """Resistance of one conductor of ``size`` in this run's metal, class, temperature and basis [ohm/km]."""
    r, source = conductors.size_resistance(size, run.material, run.temp_c, run.conductor_class,
                                           run.resistance_basis, where=run.name)
    return 1000.0 * float(r), source


def default_protection(role: str | None) -> str:
    """The device assumed for a metric run of this cable role when none is given (None: quick mode)."""
    return DEFAULT_BATTERY_PROTECTION if role in BATTERY_SIDE_ROLES else DEFAULT_PROTECTION


def run_installation(run: CableRun, defaults: Installation = Installation()) -> Installation:
    """The run's installation: what its file gives, else ``defaults``; a device given nowhere is its side's."""
    inst = replace(defaults, **dict(run.installed))
    return inst if inst.protection is not None else replace(inst, protection=default_protection(run.role))


def run_ampacity(run: CableRun, defaults: Installation = Installation(), size: ConductorSize | None = None):
    """The ampacity of one conductor of the run (in ``size`` if given), or None without a size or table value.

    A typed ``ampacity_a`` belongs to the size it was written with: it is used
    only for that size, as a rating after corrections that must carry 1.25 x
    I_max by itself (conservative).
    """
    size = size or run.size
    if run.ampacity_a is not None and (size is None or size == run.size):
        a = run.ampacity_a
        basis = "the run's ampacity_a, taken as the rating after corrections"
        if size is not None and size.series == "metric":
            # A metric conductor is coordinated with its device whatever its rating's source.
            protection = run_installation(run, defaults).protection
            return Ampacity(a, 1.0, 1.0, a, a, f"{basis}; {protection_words(protection)}", protection, typed=True)
        return Ampacity(a, 1.0, 1.0, a, a, basis, typed=True)
    if size is None:
        return None
    try:
        return ampacity(size, run.material, run_installation(run, defaults), where=run.name)
    except InputError:
        return None


def group_wiring(cables, group_names) -> GroupWiring:
    """Sum the runs of each role per group (runs of one role in series add)."""
    index = {name: k for k, name in enumerate(group_names)}
    r_string = np.zeros(len(group_names))
    r_home = np.zeros(len(group_names))
    r_feeder = r_bank = 0.0
    for run in cables:
        if run.role == "feeder":
            r_feeder += run.loop_resistance_ohm
        elif run.role in BATTERY_SIDE_ROLES:
            r_bank += run.loop_resistance_ohm
        elif run.role == "string":
            r_string[index[run.group]] += run.loop_resistance_ohm
        else:
            r_home[index[run.group]] += run.loop_resistance_ohm
    return GroupWiring(r_string, r_home, r_feeder, r_bank)
