"""The system description: module, string groups, cable runs and load.

Frozen dataclasses, validated once when a system file is read
(:mod:`pvsource.config`); everything downstream trusts them.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from pvsource.array import StringGroup
from pvsource.bank import Bank
from pvsource.controller import Controller
from pvsource.generator import Generator
from pvsource.module import Module
from pvsource.wiring import CableRun, GroupWiring, group_wiring

LOAD_KINDS = ("mpp", "resistor", "voltage", "battery")


@dataclass(frozen=True)
class Load:
    """What the array feeds, at the far end of the feeder.

    Attributes
    ----------
    kind : str
        ``mpp``: a maximum-power tracker (it holds the point of highest power
        at its own terminals, through the cables); ``resistor``; ``voltage``:
        a stiff voltage; ``battery``: an EMF behind a series resistance (the
        Thevenin model of a battery bank).
    resistance_ohm : float
        Load resistance (resistor) or internal resistance (battery) [ohm].
    emf_v : float
        The fixed voltage (voltage) or the EMF (battery) [V].
    """

    kind: str = "mpp"
    resistance_ohm: float = 0.0
    emf_v: float = 0.0

    def thevenin(self):
        """(EMF [V], resistance [ohm]) of the load branch; None for ``mpp``."""
        if self.kind == "mpp":
            return None
        if self.kind == "resistor":
            return 0.0, self.resistance_ohm
        if self.kind == "voltage":
            return self.emf_v, 0.0
        return self.emf_v, self.resistance_ohm


@dataclass(frozen=True)
class Site:
    """Where the array stands.

    Attributes
    ----------
    latitude, longitude : float
        Degrees north and east [deg].
    altitude_m : float
        Height above sea level [m].
    albedo : float
        Ground reflectance for the transposition [-].
    name : str
    """

    latitude: float
    longitude: float
    altitude_m: float = 0.0
    albedo: float = 0.2
    name: str = ""


@dataclass(frozen=True)
class ControllerGroups:
    """One charge controller and the string groups it tracks.

    Attributes
    ----------
    controller : Controller
    groups : tuple of str
        Names of the groups wired to this controller's input; each group of
        the system belongs to exactly one controller.
    """

    controller: Controller
    groups: tuple[str, ...]

    @property
    def name(self) -> str:
        return self.controller.name


@dataclass(frozen=True)
class System:
    """A PV array of string groups, its cable runs and its load.

    Attributes
    ----------
    module : Module
        The module every group is built from.
    groups : tuple of StringGroup
    cables : tuple of CableRun
    load : Load
    controller : Controller or None
        The one charge controller for every group (a ``[controller]`` table),
        or just its input limits; None without one, and None when several
        controllers share the groups (see ``controllers``).
    controllers : tuple of ControllerGroups
        Every controller with the groups it tracks: from ``[[controller]]``
        tables, or filled from ``controller`` (one controller, every group).
    bank : Bank or None
        The battery bank; with a bank, the controller charges it and ``load`` is unused.
    generator : Generator or None
        A backup generator that carries the load and charges the bank when it runs low.
    name : str
    source : str
        Where the description came from (a file name), for messages.
    """

    module: Module
    groups: tuple[StringGroup, ...]
    cables: tuple[CableRun, ...] = ()
    load: Load = field(default_factory=Load)
    name: str = ""
    source: str = ""
    controller: Controller | None = None
    bank: Bank | None = None
    site: Site | None = None
    controllers: tuple[ControllerGroups, ...] = ()
    generator: Generator | None = None

    def __post_init__(self):
        # One controller is the common case and the older form: its
        # assignment (every group) is derived, so ``replace(system,
        # controller=...)`` or a change of groups can never leave a stale one.
        if self.controller is not None:
            object.__setattr__(self, "controllers", (ControllerGroups(self.controller, self.group_names),))

    @property
    def several_controllers(self) -> bool:
        """True when groups are shared among two or more controllers."""
        return len(self.controllers) > 1

    def controller_of(self, group: str) -> ControllerGroups | None:
        """The controller that tracks a group, or None in a system without one."""
        return next((c for c in self.controllers if group in c.groups), None)

    def for_controller(self, assigned: ControllerGroups) -> "System":
        """The part of the system behind one controller, as a one-controller system.

        Its groups, their string leads and home runs, the feeder and bank runs
        named for this controller, and the bank's interconnects (which every
        controller's current shares). With one controller, the system itself.
        """
        if not self.several_controllers:
            return self
        mine = set(assigned.groups)

        def belongs(run):
            if run.role in ("string", "home-run"):
                return run.group in mine
            if run.role in ("feeder", "bank"):
                return run.controller == assigned.name
            return True

        return replace(self, groups=tuple(g for g in self.groups if g.name in mine),
                       cables=tuple(r for r in self.cables if belongs(r)), controller=assigned.controller,
                       controllers=(), name=f"{self.name} [{assigned.name}]" if self.name else assigned.name)

    def parts(self) -> tuple["System", ...]:
        """One system per controller (:meth:`for_controller`); the system itself with one controller or none."""
        if not self.several_controllers:
            return (self,)
        return tuple(self.for_controller(c) for c in self.controllers)

    @property
    def group_names(self) -> tuple[str, ...]:
        return tuple(g.name for g in self.groups)

    @property
    def wiring(self) -> GroupWiring:
        return group_wiring(self.cables, self.group_names)

    @property
    def n_series(self) -> np.ndarray:
        return np.array([g.modules_per_string for g in self.groups], dtype=float)

    @property
    def n_parallel(self) -> np.ndarray:
        return np.array([g.strings for g in self.groups], dtype=float)
