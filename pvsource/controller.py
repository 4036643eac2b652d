"""The charge controller between the array and the bank: its kind, limits and efficiency.

Three kinds:

- ``direct``: the array is wired to the bank, through an optional blocking
  diode (a constant forward drop); nothing regulates the voltage.
- ``pwm``: a switch that stays closed while the bank is below its
  regulation voltage, then opens and closes fast enough to hold it there.
- ``mppt``: a DC-DC converter that holds its input at the maximum power point
  of the array as seen through the input cables, within its input window,
  and delivers efficiency x input power at its output, within its current
  limit and the bank's charge stage.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

KINDS = ("direct", "pwm", "mppt")

# Common practice for small and mid-size MPPT charge controllers: efficiency
# rises steeply at light load and peaks near half load; typical datasheet
# curves run from about 90 % at a tenth of rated power to 96-98 % near half.
DEFAULT_EFFICIENCY_CURVE = ((0.0, 0.80), (0.05, 0.88), (0.1, 0.92), (0.25, 0.96), (0.5, 0.97), (1.0, 0.96))


@dataclass(frozen=True)
class Controller:
    """A charge controller.

    Attributes
    ----------
    name : str
        A label for reports.
    kind : str or None
        One of :data:`KINDS`; None when the file gives only input limits.
    max_input_v : float or None
        Highest PV input voltage the controller tolerates, open circuit at
        the coldest conditions included [V].
    min_input_v : float or None
        Lowest PV input voltage at which it still charges [V].
    max_output_a : float or None
        Output (charge) current limit [A].
    efficiency_curve : tuple of (fraction, efficiency)
        MPPT efficiency against output power as a fraction of rated power [-].
    rated_power_w : float or None
        Rated output power; by default max_output_a times the bank's
        absorption voltage [W].
    min_headroom_v : float
        MPPT: the input must stay this far above the output voltage [V].
    diode_drop_v : float
        Direct and PWM: forward drop of a blocking diode, 0 if none [V].
    max_input_isc_a : float or None
        Largest PV short-circuit current the input accepts [A] (checked against 1.25 x the array's Isc).
    """

    name: str = ""
    kind: str | None = None
    max_input_v: float | None = None
    min_input_v: float | None = None
    max_output_a: float | None = None
    efficiency_curve: tuple = DEFAULT_EFFICIENCY_CURVE
    rated_power_w: float | None = None
    min_headroom_v: float = 2.0
    diode_drop_v: float = 0.0
    max_input_isc_a: float | None = None


def efficiency_at(controller: Controller, output_fraction):
    """MPPT efficiency at an output power given as a fraction of rated power [-].

    Linear interpolation in the controller's curve, held flat beyond its ends.
    """
    frac, eta = np.array(controller.efficiency_curve, dtype=float).T
    return np.interp(np.asarray(output_fraction, float), frac, eta)
