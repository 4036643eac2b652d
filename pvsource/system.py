"""The system description: module, string groups, cable runs and load.

Frozen dataclasses, validated once when a system file is read
(:mod:`pvsource.config`); everything downstream trusts them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from pvsource.array import StringGroup
from pvsource.bank import Bank
from pvsource.controller import Controller
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
        The charge controller, or just its input limits.
    bank : Bank or None
        The battery bank; with a bank, the controller charges it and ``load`` is unused.
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
