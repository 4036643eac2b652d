"""The battery bank as a Thevenin source: open-circuit voltage behind a resistance.

A bank is ``cells_in_series`` cells per string and ``strings`` parallel
strings: EMF = n_s * OCV_cell(soc), R = n_s * R_cell / n_p (series and parallel
laws). Cell resistance is given as ``k = R_cell * C_cell`` [ohm*Ah], since
larger cells have proportionally more plate area, and rises in the cold as

    R_cell(T) = k / C_string * exp(b * max(0, 25 - T)),

an Arrhenius-like law with its exponent linearised about 25 degC; above 25 degC
it is held, erring towards less charge current. Charge voltages are per cell at
25 degC; lead-acid ones move by ``temp_comp_v_per_c_per_cell`` per degC.
Presets: ``data/chemistries/<key>.toml``, a source beside every value.

References
----------
.. [1] T. B. Reddy (ed.), Linden's Handbook of Batteries, 4th ed., McGraw-Hill,
   2011 (lead-acid OCV from the acid specific gravity; from memory).
.. [2] IEEE Std 1361, Guide for Selecting, Charging, Testing, and Evaluating
   Lead-Acid Batteries Used in Stand-Alone Photovoltaic (PV) Systems
   (charge stages and temperature compensation; from memory).
"""

from __future__ import annotations

import functools
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from pvsource.errors import InputError
from pvsource.names import did_you_mean

_DATA = Path(__file__).parent / "data" / "chemistries"

#: Keys of the chemistry presets (file names in ``data/chemistries``).
CHEMISTRIES = ("lfp", "lead-acid-flooded", "lead-acid-sealed", "nmc")
#: Temperature at which the OCV tables, resistances and charge voltages hold [°C].
REFERENCE_TEMP_C = 25.0

# Each scalar preset with the test it must pass and what the user is told.
_SCALARS = {
    "resistance_ohm_ah": (lambda x: 0 < x <= 10, "a resistance-capacity product above 0 [ohm*Ah]"),
    "resistance_cold_rise_per_c": (lambda x: 0 <= x <= 0.2, "a cold rise from 0 to 0.2 [1/degC]"),
    "absorption_v_per_cell": (lambda x: 0 < x <= 5, "a cell voltage above 0 and at most 5 [V]"),
    "float_v_per_cell": (lambda x: 0 < x <= 5, "a cell voltage above 0 and at most 5 [V]"),
    "temp_comp_v_per_c_per_cell": (lambda x: -0.02 <= x <= 0,
                                   "a coefficient from -0.02 to 0 [V/degC per cell]; "
                                   "charge voltage must fall as the battery warms"),
    "max_charge_c_rate": (lambda x: 0 < x <= 10, "a charge rate above 0 and at most 10 [1/h]"),
    "min_charge_temp_c": (lambda x: -60 <= x <= 70, "a temperature from -60 to 70 [degC]"),
    "absorption_start_soc": (lambda x: 0.5 <= x < 1, "a state of charge from 0.5 to below 1"),
    "coulombic_efficiency": (lambda x: 0 < x <= 1, "a fraction above 0 and at most 1"),
    "tail_current_c_rate": (lambda x: 0 < x <= 1, "a charge rate above 0 and at most 1 [1/h]"),
    "max_absorption_h": (lambda x: 0 < x <= 24, "a time above 0 and at most 24 [h]"),
    "rebulk_soc": (lambda x: 0.3 <= x < 1, "a state of charge from 0.3 to below 1"),
    "min_soc": (lambda x: 0 <= x < 1, "a state of charge from 0 to below 1"),
    "reconnect_soc": (lambda x: 0 < x <= 1, "a state of charge above 0 and at most 1"),
}
_TABLES = ("ocv_soc", "ocv_v_per_cell")
#: Names of every preset value, as accepted in ``overrides``.
PRESET_NAMES = _TABLES + tuple(_SCALARS)


@dataclass(frozen=True)
class Chemistry:
    """One cell chemistry's presets; values and sources in ``data/chemistries``.

    Attributes
    ----------
    ocv_soc, ocv_v_per_cell : tuple of float
        Resting open-circuit voltage per cell at 25 °C [V] against state of
        charge [fraction]; both strictly increasing, ``ocv_soc`` from 0 to 1.
    resistance_ohm_ah : float
        Cell resistance times cell capacity at 25 °C [ohm·Ah].
    resistance_cold_rise_per_c : float
        ``b`` in the cold rise ``exp(b * (25 - T))`` below 25 °C [1/°C].
    absorption_v_per_cell, float_v_per_cell : float
        Charge voltages per cell at 25 °C [V].
    temp_comp_v_per_c_per_cell : float
        Change of both charge voltages per °C above 25 °C [V/°C per cell], ≤ 0.
    max_charge_c_rate, min_charge_temp_c, coulombic_efficiency : float
        Largest charge current over capacity [1/h]; lowest cell temperature
        for charging [°C]; charge stored per charge delivered [fraction].
    absorption_start_soc : float
        State of charge from which the bank's charge acceptance tapers to
        zero at full charge: the constant-voltage stage [fraction].
    tail_current_c_rate, max_absorption_h : float
        Absorption ends when the current held at the absorption voltage has
        tapered to this rate times capacity [1/h], or after this long [h].
    rebulk_soc : float
        From float, back to bulk only below this state of charge [fraction].
    min_soc, reconnect_soc : float
        The low-voltage disconnect: loads are cut off at or below
        ``min_soc`` and return at or above ``reconnect_soc`` [fraction].
    sources : tuple of (str, str)
        Each preset name with its source; ``"override"`` where the user set it.
    """

    key: str
    name: str
    ocv_soc: tuple[float, ...]
    ocv_v_per_cell: tuple[float, ...]
    resistance_ohm_ah: float
    resistance_cold_rise_per_c: float
    absorption_v_per_cell: float
    float_v_per_cell: float
    temp_comp_v_per_c_per_cell: float
    max_charge_c_rate: float
    min_charge_temp_c: float
    coulombic_efficiency: float
    absorption_start_soc: float
    tail_current_c_rate: float
    max_absorption_h: float
    rebulk_soc: float
    min_soc: float
    reconnect_soc: float
    sources: tuple[tuple[str, str], ...] = ()

    def source(self, name: str) -> str:
        """The source string of preset ``name``."""
        return dict(self.sources)[name]


@dataclass(frozen=True)
class Bank:
    """A battery bank and its present state. Build it with :func:`make_bank`.

    Attributes
    ----------
    chemistry : Chemistry
        The presets, overrides applied.
    cells_in_series, strings : int
        Cells per string and strings in parallel.
    capacity_ah : float
        Total bank capacity [Ah]; each string has ``capacity_ah / strings``.
    soc, temp_c : float
        State of charge [fraction] and cell temperature [°C].
    overrides : tuple of (str, object)
        The preset values the user replaced, for reports.
    air_offset_c : float or None
        Through a season, the cells at the weather's air temperature plus
        this [°C] (a bank outdoors or in an unheated shed); None: at
        ``temp_c`` all the time.
    """

    chemistry: Chemistry
    cells_in_series: int
    strings: int
    capacity_ah: float
    soc: float
    temp_c: float
    overrides: tuple[tuple[str, object], ...] = ()
    air_offset_c: float | None = None


def _number(value, where: str, field: str, ok, expected: str) -> float:
    # bool is an int to Python, but True cells or True amp-hours is a typo.
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise InputError(where, field, f"{expected}; got {value!r}")
    x = float(value)
    if not math.isfinite(x) or not ok(x):
        raise InputError(where, field, f"{expected}; got {value!r}")
    return x


def _whole(value, where: str, field: str) -> int:
    return int(_number(value, where, field, lambda x: x >= 1 and x.is_integer(), "a whole number of at least 1"))


def _table(value, where: str, field: str) -> tuple[float, ...]:
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__"):
        raise InputError(where, field, f"a list of numbers; got {value!r}")
    return tuple(_number(v, where, field, lambda x: True, "a list of finite numbers") for v in value)


def _checked(key: str, name: str, values: dict, sources: dict, where: str, changed=frozenset()) -> Chemistry:
    """Validate preset ``values`` and build the Chemistry; fields the user set are named ``overrides.<name>``."""
    def label(n):
        return f"overrides.{n}" if n in changed else n

    out = {n: _table(values[n], where, label(n)) for n in _TABLES}
    for n, (ok, expected) in _SCALARS.items():
        out[n] = _number(values[n], where, label(n), ok, expected)
    soc, v = np.array(out["ocv_soc"]), np.array(out["ocv_v_per_cell"])
    if soc.size < 2 or soc[0] != 0 or soc[-1] != 1 or np.any(np.diff(soc) <= 0):
        raise InputError(where, label("ocv_soc"), "at least two states of charge, strictly increasing from 0 to 1")
    if v.size != soc.size:
        # The table the user replaced is the one out of step.
        blame = "ocv_soc" if changed & set(_TABLES) == {"ocv_soc"} else "ocv_v_per_cell"
        raise InputError(where, label(blame), f"as many voltages as states of charge; got {v.size} and {soc.size}")
    if v[0] <= 0 or np.any(np.diff(v) <= 0):
        raise InputError(where, label("ocv_v_per_cell"), "cell voltages above 0 [V], strictly increasing with soc")
    if out["float_v_per_cell"] > out["absorption_v_per_cell"]:
        # Blame the value the user typed; both are fine on their own.
        blame = "absorption_v_per_cell" if "absorption_v_per_cell" in changed and "float_v_per_cell" not in changed \
            else "float_v_per_cell"
        raise InputError(where, label(blame), "float voltage at most the absorption voltage")
    if out["reconnect_soc"] <= out["min_soc"]:
        blame = "min_soc" if "min_soc" in changed and "reconnect_soc" not in changed else "reconnect_soc"
        def given(n):
            return f"{n} {out[n]:g}" + ("" if n in changed else f" (the {key} default)")
        raise InputError(where, label(blame), "reconnect_soc above min_soc (the disconnect needs a gap to hold); "
                                              f"got {given('min_soc')} and {given('reconnect_soc')}")
    return Chemistry(key, name, **out, sources=tuple((n, sources[n]) for n in PRESET_NAMES))


@functools.cache
def _preset(key: str) -> Chemistry:
    path = _DATA / f"{key}.toml"
    with path.open("rb") as f:
        raw = tomllib.load(f)
    values = {"ocv_soc": raw["ocv"]["soc"], "ocv_v_per_cell": raw["ocv"]["v_per_cell"]}
    values |= {n: raw[n]["value"] for n in _SCALARS}
    sources = {"ocv_soc": raw["ocv"]["source"], "ocv_v_per_cell": raw["ocv"]["source"]}
    sources |= {n: raw[n]["source"] for n in _SCALARS}
    return _checked(key, raw["name"], values, sources, path.name)


def load_chemistry(key: str, where: str = "chemistry") -> Chemistry:
    """The presets of chemistry ``key``, one of :data:`CHEMISTRIES`.

    Raises
    ------
    InputError
        For an unknown key, listing the valid ones.
    """
    if key not in CHEMISTRIES:
        raise InputError(where, "chemistry", f"unknown chemistry {key!r}; expected one of {', '.join(CHEMISTRIES)}")
    return _preset(key)


def make_bank(chemistry_key: str, cells_in_series: int, strings: int, capacity_ah: float, soc: float,
              temp_c: float, overrides: dict | None = None, where: str = "bank",
              air_offset_c: float | None = None) -> Bank:
    """Validate a bank description and apply overrides to its chemistry presets.

    Parameters
    ----------
    chemistry_key : str
        One of :data:`CHEMISTRIES`.
    cells_in_series, strings : int
        Cells per string and parallel strings, whole numbers ≥ 1.
    capacity_ah, soc, temp_c : float
        Total capacity [Ah] > 0; state of charge [fraction] 0 to 1; cell
        temperature [°C] -40 to 70.
    overrides : dict or None
        Preset values to replace, by name (any of :data:`PRESET_NAMES`).
    where : str
        Where the description came from, for error messages.
    air_offset_c : float or None
        Through a season, the cells at the air temperature plus this [°C],
        -20 to 40; None: at ``temp_c`` throughout.

    Raises
    ------
    InputError
        Naming the offending field; for unknown names, listing the valid ones.
    """
    preset = load_chemistry(chemistry_key, where)
    n_s = _whole(cells_in_series, where, "cells_in_series")
    n_p = _whole(strings, where, "strings")
    cap = _number(capacity_ah, where, "capacity_ah", lambda x: x > 0, "a capacity above 0 [Ah]")
    state = _number(soc, where, "soc", lambda x: 0 <= x <= 1, "a state of charge from 0 to 1")
    temp = _number(temp_c, where, "temp_c", lambda x: -40 <= x <= 70, "a cell temperature from -40 to 70 [degC]")
    offset = None if air_offset_c is None else _number(
        air_offset_c, where, "air_offset_c", lambda x: -20 <= x <= 40,
        "a rise of the cells above the air from -20 to 40 [degC]")
    overrides = {} if overrides is None else overrides
    if not isinstance(overrides, dict):
        raise InputError(where, "overrides", "a table of preset names and values")
    for n in overrides:
        if n not in PRESET_NAMES:
            raise InputError(where, f"overrides.{n}", f"unknown preset{did_you_mean(n, PRESET_NAMES)}; "
                                                      f"expected one of {', '.join(PRESET_NAMES)}")
    chemistry = preset
    if overrides:
        values = {n: getattr(preset, n) for n in PRESET_NAMES} | overrides
        sources = dict(preset.sources) | {n: "override" for n in overrides}
        chemistry = _checked(preset.key, preset.name, values, sources, where, frozenset(overrides))
    return Bank(chemistry, n_s, n_p, cap, state, temp, tuple((n, getattr(chemistry, n)) for n in sorted(overrides)),
                offset)


def _state(bank: Bank, soc, temp_c):
    soc = bank.soc if soc is None else soc
    temp_c = bank.temp_c if temp_c is None else temp_c
    return np.broadcast_arrays(np.asarray(soc, dtype=float), np.asarray(temp_c, dtype=float))


def _out(x: np.ndarray):
    return x[()] if x.ndim == 0 else x


def open_circuit_v(bank: Bank, soc=None, temp_c=None):
    """Resting open-circuit voltage (EMF) of the bank [V].

    ``soc`` [fraction] is clipped to [0, 1] and interpolated linearly in the
    25 °C table. ``temp_c`` [°C] only sets the output shape: the OCV moves by
    well under 1 mV/°C per cell (common practice, from memory).
    """
    soc, _ = _state(bank, soc, temp_c)
    c = bank.chemistry
    return _out(bank.cells_in_series * np.interp(np.clip(soc, 0.0, 1.0), c.ocv_soc, c.ocv_v_per_cell))


def internal_resistance_ohm(bank: Bank, soc=None, temp_c=None):
    """Internal resistance of the bank [ohm] at cell temperature ``temp_c`` [°C].

    ``n_s * R_cell(T) / n_p`` with ``R_cell = k / (capacity_ah / n_p)`` and the
    cold rise of the module docstring (series and parallel resistance laws).
    ``soc`` [fraction] only sets the output shape: the dependence on state of
    charge is not modelled.
    """
    _, temp = _state(bank, soc, temp_c)
    c = bank.chemistry
    r_cell = c.resistance_ohm_ah / (bank.capacity_ah / bank.strings)
    rise = np.exp(c.resistance_cold_rise_per_c * np.maximum(0.0, REFERENCE_TEMP_C - temp))
    return _out(bank.cells_in_series * r_cell * rise / bank.strings)


def thevenin(bank: Bank, soc=None, temp_c=None):
    """The bank as EMF behind a resistance: ``(emf_v [V], r_ohm [ohm])``.

    The terminal voltage while a current ``i`` [A] charges it is ``emf_v + i * r_ohm``.
    """
    return open_circuit_v(bank, soc, temp_c), internal_resistance_ohm(bank, soc, temp_c)


def charge_voltages_v(bank: Bank, temp_c=None):
    """Absorption and float voltages of the whole bank [V] at ``temp_c`` [°C].

    Each is ``n_s * (v_per_cell + temp_comp * (T - 25))``; the coefficient is
    zero for lithium. The compensation is not clamped at temperature extremes.
    """
    _, temp = _state(bank, None, temp_c)
    c = bank.chemistry
    shift = c.temp_comp_v_per_c_per_cell * (temp - REFERENCE_TEMP_C)
    n_s = bank.cells_in_series
    return _out(n_s * (c.absorption_v_per_cell + shift)), _out(n_s * (c.float_v_per_cell + shift))


def max_charge_current_a(bank: Bank, temp_c=None):
    """Largest charge current [A]: C-rate times capacity, 0 below the minimum charging temperature."""
    _, temp = _state(bank, None, temp_c)
    c = bank.chemistry
    return _out(np.where(temp >= c.min_charge_temp_c, c.max_charge_c_rate * bank.capacity_ah, 0.0))


#: Cells in series of the nominal 12, 24 and 48 V classes (common practice:
#: LFP 12.8/25.6/51.2 V, lead-acid 6/12/24 cells, NMC 3S/7S/13S packs).
NOMINAL_CLASS_CELLS = {"lfp": {12.0: 4, 24.0: 8, 48.0: 16}, "lead-acid-flooded": {12.0: 6, 24.0: 12, 48.0: 24},
                       "lead-acid-sealed": {12.0: 6, 24.0: 12, 48.0: 24}, "nmc": {12.0: 3, 24.0: 7, 48.0: 13}}


def with_nominal_class(bank: Bank, volts: float) -> Bank:
    """The same bank rebuilt for a nominal voltage class, storing the same energy."""
    from dataclasses import replace

    cells = NOMINAL_CLASS_CELLS[bank.chemistry.key][float(volts)]
    return replace(bank, cells_in_series=cells, capacity_ah=bank.capacity_ah * bank.cells_in_series / cells)


#: Nominal cell voltage by chemistry [V]: the figure a bank is sold and priced by, nominal energy =
#: capacity x cells in series x this (common practice, matching the classes above: lead-acid 2.0 V
#: (12 V = 6 cells), LFP 3.2 V (12.8 V = 4 cells), NMC 3.7 V (makers state 3.6-3.7 V)).
NOMINAL_CELL_V = {"lfp": 3.2, "lead-acid-flooded": 2.0, "lead-acid-sealed": 2.0, "nmc": 3.7}


def nominal_energy_kwh(bank: Bank) -> float:
    """The bank's nominal energy [kWh]: capacity [Ah] x nominal voltage (cells in series x :data:`NOMINAL_CELL_V`)."""
    return bank.capacity_ah * bank.cells_in_series * NOMINAL_CELL_V[bank.chemistry.key] / 1000.0
