"""String groups: modules in series, strings in parallel.

A group is a set of identical strings that share conditions (one roof face,
one tracker row): ``modules_per_string`` modules in series, ``strings`` of
them in parallel. Series connection scales voltage, parallel scales current;
the solver works per module and scales with these two numbers.
"""

from __future__ import annotations

from dataclasses import dataclass



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
        Mounting preset for the cell-temperature model (see :mod:`pvsource.sky`).
    """

    name: str
    modules_per_string: int
    strings: int
    irradiance_w_m2: float | None = None
    cell_temp_c: float | None = None
    tilt_deg: float = 0.0
    azimuth_deg: float = 180.0
    mounting: str = "open_rack"
