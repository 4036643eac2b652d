"""Ranges of the quantities people type, and what a value outside them says about its unit.

A number typed in the wrong unit is the commonest slip in a design file:
kW/m2 where W/m2 is asked, degF or kelvin where degC is. A value that is
impossible in the stated unit is refused, and the refusal names the unit it
most likely is in; a value that is possible but implausible for what it
describes earns a note. This module imports nothing, so the command line can
read these ranges without loading the numerical libraries.
"""

from __future__ import annotations

# Ground-level irradiance: the solar constant is about 1361 W/m2 and cloud-edge
# enhancement can briefly pass 1500 W/m2 (common practice); 2000 leaves room.
IRRADIANCE_RANGE_W_M2 = (0.0, 2000.0)
# Cells below -60 degC or above 120 degC are outside any rating (from memory:
# module data sheets rate -40 to +85 degC; the margin allows extremes).
CELL_TEMP_RANGE_C = (-60.0, 120.0)
# Common practice: in full sun, cells of rack- or roof-mounted modules run
# some 25-35 degC above the air; the high end makes the low-Vmp check cautious.
DEFAULT_CELL_RISE_C = 35.0
# A design point is a sunny hour; below this it is dusk, not a design case.
DESIGN_IRRADIANCE_MIN_W_M2 = 100.0
# Full sun is about 1 kW/m2: a value up to this in "W/m2" is almost surely kW/m2.
KW_M2_TYPED_MAX = 2.0
# Direct sunlight is roughly 100,000 lux for about 1000 W/m2 (from memory:
# a luminous efficacy near 100 lm/W); values this large are lux, not W/m2.
LUX_PER_W_M2 = 100.0
ABSOLUTE_ZERO_C = -273.15
#: One international foot [m] (exact, by definition).
FOOT_M = 0.3048


def irradiance_hint(value_w_m2: float) -> str | None:
    """A refusal's hint for an irradiance above the range: the unit it was probably in."""
    hi = IRRADIANCE_RANGE_W_M2[1]
    if value_w_m2 > hi and value_w_m2 / LUX_PER_W_M2 <= hi:
        return (f"this looks like illuminance in lux (about {value_w_m2 / LUX_PER_W_M2:,.0f} W/m2); "
                "give irradiance in W/m2")
    return None


def design_irradiance_note(value_w_m2: float) -> str | None:
    """A note for a design irradiance that is possible but unlikely [W/m2]; None when it is plausible."""
    if 0.0 < value_w_m2 <= KW_M2_TYPED_MAX:
        return (f"{value_w_m2:g} W/m2 is almost dark; if kW/m2 was meant, that is "
                f"{value_w_m2 * 1000.0:g} W/m2 (the unit here is W/m2)")
    if 0.0 < value_w_m2 < DESIGN_IRRADIANCE_MIN_W_M2:
        return (f"{value_w_m2:g} W/m2 is dusk light, not the sunny hour a design point usually is "
                "(the unit here is W/m2)")
    return None


def temperature_hint(value_c: float, lo: float, hi: float) -> str | None:
    """A refusal's hint for a temperature outside [lo, hi] degC: degF or kelvin, when that fits.

    Parameters
    ----------
    value_c : float
        The value as typed, read as degC.
    lo, hi : float
        The plausible range of what it describes [degC].
    """
    if lo <= value_c <= hi:
        return None
    as_f = (value_c - 32.0) * 5.0 / 9.0
    as_k = value_c + ABSOLUTE_ZERO_C
    # Kelvin first: a plausible temperature in K is above 200, where degF is far too hot.
    if value_c > 0 and lo <= as_k <= hi:
        return f"this looks like kelvin ({value_c:g} K = {as_k:.1f} degC); give degC"
    if lo <= as_f <= hi:
        return f"this looks like degF ({value_c:g} degF = {as_f:.1f} degC); give degC"
    return None


def with_hint(message: str, hint: str | None) -> str:
    """``message`` and, when there is one, ``hint`` after a semicolon."""
    return f"{message}; {hint}" if hint else message
