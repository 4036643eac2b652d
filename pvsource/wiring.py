"""Cable runs and where they sit in the circuit.

A run is a two-conductor DC circuit: its loop resistance is twice the one-way
route length times the resistance per conductor length, divided by the
conductors in parallel. Its role places it in the network:

- ``string``: a lead of every string in one group (each string has its own);
- ``group``: the home run from a group to the combiner bus;
- ``feeder``: from the combiner bus to the load (several feeders add up).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

ROLES = ("string", "group", "feeder")


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
        Resistance of one conductor per km [ohm/km].
    group : str or None
        The group a ``string`` or ``group`` run belongs to.
    conductors_in_parallel : int
        Conductors sharing each pole.
    """

    name: str
    role: str
    length_m: float
    resistance_ohm_per_km: float
    group: str | None = None
    conductors_in_parallel: int = 1

    @property
    def loop_resistance_ohm(self) -> float:
        """Out-and-back resistance of the run [ohm]."""
        return 2.0 * self.length_m * self.resistance_ohm_per_km / 1000.0 / self.conductors_in_parallel


@dataclass(frozen=True)
class GroupWiring:
    """Loop resistances per group and of the feeder, in the solver's form.

    Attributes
    ----------
    r_string_ohm : ndarray, shape (G,)
        Loop resistance of the lead of one string in each group [ohm].
    r_home_ohm : ndarray, shape (G,)
        Loop resistance of each group's home run [ohm].
    r_feeder_ohm : float
        Total loop resistance between the combiner bus and the load [ohm].
    """

    r_string_ohm: np.ndarray
    r_home_ohm: np.ndarray
    r_feeder_ohm: float


def group_wiring(cables, group_names) -> GroupWiring:
    """Sum the runs of each role per group (runs of one role in series add)."""
    index = {name: k for k, name in enumerate(group_names)}
    r_string = np.zeros(len(group_names))
    r_home = np.zeros(len(group_names))
    r_feeder = 0.0
    for run in cables:
        if run.role == "feeder":
            r_feeder += run.loop_resistance_ohm
        elif run.role == "string":
            r_string[index[run.group]] += run.loop_resistance_ohm
        else:
            r_home[index[run.group]] += run.loop_resistance_ohm
    return GroupWiring(r_string, r_home, r_feeder)
