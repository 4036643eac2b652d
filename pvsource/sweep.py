"""Sweeps of one design or operating variable, with the linearised model beside the exact one.

Each step solves the system exactly (:func:`pvsource.operating.operating_points`)
and records delivered power, efficiency, the matching ratio and the charge
current. Beside it, the Thevenin equivalent of the array at the design point
predicts the same quantities as if the array were linear: P = E^2 m / (R (1+m)^2)
and efficiency m / (1 + m), with a maximum at m = 1. Where the two agree the
linear view explains the numbers; where they part, the array's curvature does.

Variables (``--over``):

=======================  =====================================================
``load_resistance_ohm``  a resistor load [ohm]
``bank_emf_v``           a bank wired straight to the array, its EMF swept [V];
                         its resistance is the system's bank or battery load's
``bank_class_v``         the bank's cells in series for nominal 12, 24, 48 V,
                         at the same stored energy, with the system's controller
``soc``                  the bank's state of charge [-]
``modules_per_string``   modules per string, every group [-]
``size:RUN``             the conductor size of the run named RUN, along its series
``irradiance_w_m2``      every group [W/m2]
``cell_temp_c``          every group [degC]
=======================  =====================================================

Names are spelt like the system file's keys and ``explore --vary``'s; a hyphen
may stand for an underscore, and the earlier names (:data:`pvsource.names.VARIABLE_ALIASES`, one table for
both commands) still work.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from pvsource import bank as bank_model
from pvsource import conductors
from pvsource.alerts import names as alert_names
from pvsource.errors import InputError
from pvsource.linear import linear_transfer
from pvsource.names import VARIABLE_ALIASES, canonical
from pvsource.operating import operating_points
from pvsource.runs import resize_run
from pvsource.system import Load, System

VARIABLES = ("load_resistance_ohm", "bank_emf_v", "bank_class_v", "soc", "modules_per_string", "size:RUN",
             "irradiance_w_m2", "cell_temp_c")
MAX_STEPS = 2000
NOMINAL_CLASSES_V = (12.0, 24.0, 48.0)
ROW_KEYS = ("value", "delivered_w", "efficiency", "matching_ratio", "charge_current_a", "v", "i", "p",
            "generated_w", "linear_p_w", "linear_efficiency", "alerts")


def variable_name(text: str) -> str:
    """The canonical name of a sweep variable (see the module's table), or an InputError naming ``--over``."""
    return canonical(text, VARIABLES, VARIABLE_ALIASES, "--over")


def _number(text: str, option: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise InputError(option, None, f"expected a number, got {text!r}") from None
    if not np.isfinite(value):
        raise InputError(option, None, f"expected a finite number, got {text!r}")
    return value


def sweep_values(system: System, variable: str, start: str, stop: str, steps: int):
    """The values a sweep visits, and their unit, checked against the system."""
    variable = variable_name(variable)
    if not 2 <= steps <= MAX_STEPS:
        raise InputError("--steps", None, f"expected 2 to {MAX_STEPS} steps, got {steps}")
    if variable.startswith("size:"):
        name = variable[5:]
        run = next((r for r in system.cables if r.name == name), None)
        if run is None:
            raise InputError("--over", None, f"no cable run named {name!r}; runs: "
                                             f"{', '.join(r.name for r in system.cables) or 'none'}")
        lo = conductors.parse_size(start, where="--from")
        hi = conductors.parse_size(stop, where="--to")
        if lo.series != hi.series:
            raise InputError("--to", None, f"{hi.label} is not in the series of {lo.label}")
        lo, hi = sorted((lo, hi), key=lambda z: z.area_mm2)
        sizes = [s for s in conductors.standard_sizes(lo.series) if lo.area_mm2 <= s.area_mm2 <= hi.area_mm2]
        if not sizes:
            raise InputError("--from", None, f"no standard size between {lo.label} and {hi.label}")
        return sizes, "size"
    a, b = _number(start, "--from"), _number(stop, "--to")
    if variable == "bank_class_v":
        if system.bank is None:
            raise InputError("--over", None, "bank_class_v needs a system with a [bank]")
        classes = [c for c in NOMINAL_CLASSES_V if min(a, b) <= c <= max(a, b)]
        if not classes:
            raise InputError("--from", None, f"no nominal class ({', '.join(f'{c:g}' for c in NOMINAL_CLASSES_V)} V) "
                                             f"between {a:g} and {b:g} V")
        return classes, "V"
    if variable == "modules_per_string":
        lo, hi = int(round(min(a, b))), int(round(max(a, b)))
        if lo < 1 or hi > 200:
            raise InputError("--from", None, f"expected modules per string from 1 to 200, got {a:g} to {b:g}")
        return list(range(lo, hi + 1)), "modules"
    limits = {"load_resistance_ohm": (1e-6, 1e9, "ohm"), "bank_emf_v": (0.1, 2000.0, "V"), "soc": (0.0, 1.0, "-"),
              "irradiance_w_m2": (0.0, 2000.0, "W/m2"), "cell_temp_c": (-60.0, 120.0, "degC")}
    if variable not in limits:
        raise InputError("--over", None, f"expected one of {', '.join(VARIABLES)}, got {variable!r}")
    lo, hi, unit = limits[variable]
    for option, value in (("--from", a), ("--to", b)):
        if not lo <= value <= hi:
            raise InputError(option, None, f"expected {lo:g} to {hi:g} {unit} for {variable}, got {value:g}")
    if variable == "soc" and system.bank is None:
        raise InputError("--over", None, "soc needs a system with a [bank]")
    if variable == "load_resistance_ohm" and system.several_controllers:
        raise InputError("--over", None, "load_resistance_ohm puts a resistor in place of the controller and the bank, "
                                         "at the end of the one feeder; with several [[controller]] tables each has "
                                         "its own feeder")
    if variable == "load_resistance_ohm":
        # Resistances matter by ratio: step them geometrically.
        return list(np.geomspace(a, b, steps)), unit
    return list(np.linspace(a, b, steps)), unit


def _bank_resistance(system: System) -> float:
    if system.bank is not None:
        return float(bank_model.internal_resistance_ohm(system.bank))
    if system.load.kind == "battery":
        return system.load.resistance_ohm
    return 0.0


LOAD_WORDS = {"mpp": "maximum-power load", "resistor": "resistor load", "voltage": "fixed-voltage load",
              "battery": "battery load"}


def what_changes(system: System, variable: str) -> tuple[str, str | None]:
    """How a sweep changes the system, and what it replaces (None when it replaces nothing).

    Returns
    -------
    changes : str
        One sentence for the header and the JSON.
    replaced : str or None
        The part of the system the sweep cannot keep, in words; None when the
        sweep runs through the system as it is.
    """
    if variable == "load_resistance_ohm":
        if system.bank is not None:
            kind = {"mppt": "tracking (MPPT) ", "pwm": "PWM ", "direct": "direct "}.get(
                system.controller.kind if system.controller is not None else None, "")
            return ("a resistor at the end of the feeder takes each value",
                    f"the {kind}controller and the bank are replaced by a resistor wired "
                    "straight to the feeder: a controller charges a bank and cannot feed a bare resistor")
        if system.load.kind != "resistor":
            return ("a resistor at the end of the feeder takes each value",
                    f"the {LOAD_WORDS[system.load.kind]} is replaced by a resistor")
        return "the resistor load takes each value", None
    if variable == "bank_emf_v":
        if system.bank is not None:
            return ("the bank's resting voltage is held at each value behind the system's own controller; its "
                    "resistance, charge voltages and state of charge stay the file's"), None
        if system.load.kind != "battery":
            return ("a battery at the end of the feeder takes each resting voltage",
                    f"the {LOAD_WORDS[system.load.kind]} is replaced by a battery with "
                    f"{_bank_resistance(system):g} ohm internal resistance")
        return "the battery load's EMF takes each value", None
    words = {"bank_class_v": "the bank is rebuilt for each nominal class at the same stored energy",
             "soc": "the bank's state of charge takes each value", "modules_per_string": "every group's modules per string",
             "irradiance_w_m2": "every group's irradiance", "cell_temp_c": "every group's cell temperature"}
    if variable.startswith("size:"):
        return f"the conductor size of the run {variable[5:]!r}", None
    return words.get(variable, variable), None


def _held_emf(bank: bank_model.Bank, emf_v: float) -> bank_model.Bank:
    """The bank with its resting voltage held at ``emf_v`` at every state of charge [V]."""
    chem = bank.chemistry
    flat = (float(emf_v) / bank.cells_in_series,) * len(chem.ocv_soc)
    return replace(bank, chemistry=replace(chem, ocv_v_per_cell=flat))


def design_value(system: System, variable: str, irradiance_w_m2=None, cell_temp_c=None):
    """The value of the swept variable in the unchanged system, or None where it has none."""
    b = system.bank
    if variable == "load_resistance_ohm":
        return system.load.resistance_ohm if b is None and system.load.kind == "resistor" else None
    if variable == "bank_emf_v":
        if b is not None:
            return float(bank_model.open_circuit_v(b))
        return system.load.emf_v if system.load.kind == "battery" else None
    if variable == "bank_class_v" and b is not None:
        classes = bank_model.NOMINAL_CLASS_CELLS.get(b.chemistry.key, {})
        return next((v for v, cells in classes.items() if cells == b.cells_in_series), None)
    if variable == "soc":
        return None if b is None else b.soc
    if variable == "modules_per_string":
        counts = {g.modules_per_string for g in system.groups}
        return counts.pop() if len(counts) == 1 else None
    if variable.startswith("size:"):
        run = next((r for r in system.cables if r.name == variable[5:]), None)
        return run.size.label if run is not None and run.size is not None else None
    given = {"irradiance_w_m2": (irradiance_w_m2, "irradiance_w_m2"), "cell_temp_c": (cell_temp_c, "cell_temp_c")}
    if variable in given:
        value, attr = given[variable]
        if value is None:
            values = {getattr(g, attr) for g in system.groups}
            return values.pop() if len(values) == 1 else None
        return float(value) if np.ndim(value) == 0 and not isinstance(value, dict) else None
    return None


def _variant(system: System, variable: str, value) -> System:
    """The system with one thing changed (see :func:`what_changes`)."""
    if variable == "load_resistance_ohm":
        return replace(system, load=Load("resistor", resistance_ohm=float(value)), bank=None)
    if variable == "bank_emf_v":
        if system.bank is not None:
            return replace(system, bank=_held_emf(system.bank, value))
        return replace(system, load=Load("battery", emf_v=float(value), resistance_ohm=_bank_resistance(system)))
    if variable == "bank_class_v":
        return replace(system, bank=bank_model.with_nominal_class(system.bank, value))
    if variable == "modules_per_string":
        return replace(system, groups=tuple(replace(g, modules_per_string=int(value)) for g in system.groups))
    if variable.startswith("size:"):
        return resize_run(system, variable[5:], value)
    return system


def run_sweep(system: System, variable: str, start: str, stop: str, steps: int, irradiance_w_m2=None,
              cell_temp_c=None) -> tuple[pd.DataFrame, dict]:
    """Solve the system at every value of one variable.

    Returns
    -------
    rows : DataFrame
        One row per value with :data:`ROW_KEYS`.
    design : dict
        The unchanged system's point (``matching_ratio``, ``delivered_w``,
        ``efficiency``, ``p``) and its array Thevenin equivalent (``e_v``,
        ``r_ohm``) from which the linear columns are predicted; ``value``, the
        swept variable's own value there (None where it has none);
        ``changes``, what the sweep varies, and ``replaced``, the part of the
        system it had to replace (None when it runs through the system as it is).
    """
    variable = variable_name(variable)
    values, unit = sweep_values(system, variable, start, stop, steps)
    g = irradiance_w_m2
    t = cell_temp_c
    base = operating_points(system, g, t).iloc[0]
    e, r = float(base["thevenin_e_v"]), float(base["thevenin_r_ohm"])
    frames = []
    if variable in ("irradiance_w_m2", "cell_temp_c", "soc"):
        arr = np.asarray(values, float)
        kwargs = {"irradiance_w_m2": dict(irradiance_w_m2=arr, cell_temp_c=t if t is not None else None),
                  "cell_temp_c": dict(irradiance_w_m2=g, cell_temp_c=arr),
                  "soc": dict(irradiance_w_m2=g, cell_temp_c=t, soc=arr)}[variable]
        if variable == "irradiance_w_m2" and t is None:
            kwargs["cell_temp_c"] = None
        if variable == "cell_temp_c" and g is None:
            kwargs["irradiance_w_m2"] = None
        frame = operating_points(system, **_broadcast(kwargs, len(arr), system))
        frames.append(frame)
    else:
        for value in values:
            frames.append(operating_points(_variant(system, variable, value), g, t))
    df = pd.concat(frames, ignore_index=True)
    m = df["matching_ratio"].to_numpy()
    m = np.where(np.abs(m) < 1e6, m, np.nan)  # open circuit: no current, no ratio
    # The linear model describes a source feeding a load (m > 0); back-feed has no analogue.
    with np.errstate(invalid="ignore", divide="ignore"):
        lin = linear_transfer(e, r, np.where(m > 0, m, np.nan) * r)
    rows = pd.DataFrame({
        "value": [v.label if hasattr(v, "label") else v for v in values],
        "delivered_w": df["delivered_w"], "efficiency": df["efficiency"], "matching_ratio": m,
        "charge_current_a": df["charge_current_a"] if "charge_current_a" in df else np.nan,
        "v": df["v"], "i": df["i"], "p": df["p"], "generated_w": df["generated_w"],
        "linear_p_w": lin["p_load_w"], "linear_efficiency": lin["efficiency"],
        "alerts": [alert_names(c) for c in df["alerts"]],
    })
    changes, replaced = what_changes(system, variable)
    design = {"matching_ratio": float(base["matching_ratio"]), "delivered_w": float(base["delivered_w"]),
              "efficiency": float(base["efficiency"]), "p": float(base["p"]), "e_v": e, "r_ohm": r,
              "source_p_mp": float(base["source_p_mp"]), "unit": unit, "variable": variable,
              "value": design_value(system, variable, g, t), "changes": changes, "replaced": replaced}
    return rows, design


def _broadcast(kwargs: dict, n: int, system: System) -> dict:
    """Fill file conditions for the variables not swept, as arrays of the sweep's length."""
    out = dict(kwargs)
    for key, attr in (("irradiance_w_m2", "irradiance_w_m2"), ("cell_temp_c", "cell_temp_c")):
        value = out.get(key)
        if value is None:
            missing = [g.name for g in system.groups if getattr(g, attr) is None]
            if missing:
                raise InputError(system.source, f"group {missing[0]!r}",
                                 f"has no {attr}; give it in the file or on the command line")
            out[key] = np.repeat(np.array([[getattr(g, attr) for g in system.groups]]), n, axis=0)
        elif not isinstance(value, dict) and np.ndim(value) == 0:
            out[key] = np.full(n, float(value))
    return out
