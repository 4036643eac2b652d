"""String groups: modules in series, strings in parallel.

A group is a set of identical strings that share conditions (one roof face,
one tracker row): ``modules_per_string`` modules in series, ``strings`` of
them in parallel. Series connection scales voltage, parallel scales current;
the solver works per module and scales with these two numbers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class StringGroup:
    """Identical parallel strings under the same conditions.

    Attributes
    ----------
    name : str
        A label, unique within the array.
    modules_per_string : int
        Modules in series in each string.
    strings : int
        Strings in parallel.
    irradiance_w_m2 : float or None
        Effective irradiance on the group [W/m2], if the system file fixes it.
    cell_temp_c : float or None
        Cell temperature [degC], if the system file fixes it.
    tilt_deg : float
        Tilt of the modules from horizontal [deg].
    azimuth_deg : float
        Direction the modules face, degrees east of north (180 = south) [deg].
    mounting : str
        Mounting preset for the cell-temperature model (see :mod:`pvsource.weather`).
    """

    name: str
    modules_per_string: int
    strings: int
    irradiance_w_m2: float | None = None
    cell_temp_c: float | None = None
    tilt_deg: float = 0.0
    azimuth_deg: float = 180.0
    mounting: str = "open_rack"

    @property
    def module_count(self) -> int:
        return self.modules_per_string * self.strings


def string_voltage_v(module_v, modules_per_string):
    """Voltage of a string of identical modules carrying the same current [V]."""
    return np.asarray(module_v) * modules_per_string


def group_current_a(module_i, strings):
    """Current of identical strings in parallel at the same voltage [A]."""
    return np.asarray(module_i) * strings


def group_resistance_ohm(module_r_ohm, modules_per_string, strings):
    """A resistance per module seen at the group's terminals [ohm].

    Series modules add, parallel strings divide: R n_s / n_p. Applies to the
    series resistance and to the dynamic (incremental) resistance alike.
    """
    return np.asarray(module_r_ohm) * modules_per_string / strings
