"""The charge controller between the array and the bank.

For now it carries the equipment limits the design checks need; the
controller's behaviour (direct, PWM, MPPT, charge stages) builds on this.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Controller:
    """A charge controller's input limits.

    Attributes
    ----------
    name : str
        A label for reports.
    max_input_v : float or None
        Highest PV input voltage the controller tolerates, open circuit at
        the coldest conditions included [V].
    min_input_v : float or None
        Lowest PV input voltage at which it still charges [V].
    """

    name: str = ""
    max_input_v: float | None = None
    min_input_v: float | None = None
