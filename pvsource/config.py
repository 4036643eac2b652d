"""Read system and datasheet files (TOML) into validated dataclasses.

Every problem is an :class:`~pvsource.errors.InputError` naming the file and
the field, e.g. ``system.toml: [load].emf_v: expected a number, got 'abc'``.
Unknown keys are errors too, so a typo never passes silently: a misspelt key
or value is answered with the nearest known one. A value impossible in its
unit is refused with the unit it was probably typed in (degF, kelvin, lux);
one that is possible but unlikely (a design point of 0.7 W/m2, kW/m2 typed
as W/m2) is let through with a note (:func:`pvsource.errors.note`). Runs and
groups are named in messages by their ``name``.
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

from pvsource import ampacity as ampacity_tables
from pvsource import conductors
from pvsource.array import StringGroup
from pvsource.bank import CHEMISTRIES, Bank, make_bank
from pvsource.bank import charge_voltages_v as bank_charge_voltages
from pvsource.controller import DEFAULT_EFFICIENCY_CURVE, KINDS, Controller, make_controller
from pvsource.errors import InputError, note
from pvsource.generator import MAX_STOP_SOC, Generator
from pvsource.inputs import MAX_TOML_BYTES, check_toml_shape, read_bounded
from pvsource.module import Datasheet, DiodeParameters, Module, fit_datasheet, module_from_parameters
from pvsource.names import did_you_mean, nearest
from pvsource.system import LOAD_KINDS, ControllerGroups, Load, Site, System
from pvsource.units import (
    CELL_TEMP_RANGE_C, FOOT_M, IRRADIANCE_RANGE_W_M2, design_irradiance_note, irradiance_hint, temperature_hint,
    with_hint,
)
from pvsource.wiring import GROUP_ROLES, ROLES, CableRun

DATASHEET_KEYS = ("v_oc", "i_sc", "v_mp", "i_mp", "isc_temp_coeff_pct", "voc_temp_coeff_pct", "cells_in_series")
PARAMETER_KEYS = ("i_l_ref_a", "i_o_ref_a", "r_s_ohm", "r_sh_ref_ohm", "a_ref_v", "alpha_sc_a_per_c", "cells_in_series")
DATASHEET_OPTIONAL = ("pmax_temp_coeff_pct", "noct_c")
PARAMETER_OPTIONAL = ("eg_ref_ev", "degdt_per_c", "adjust_pct")
# Magnitudes beyond these are typing mistakes, not systems (common practice:
# module strings stay below 1500 V, and no feeder runs for kilometres).
MAX_MODULES_PER_STRING = 200
MAX_STRINGS = 10_000
MAX_LENGTH_M = 10_000.0
BANK_TEMP_RANGE_C = (-40.0, 70.0)
CONDUCTOR_TEMP_RANGE_C = (-60.0, 250.0)
MATERIAL_NAMES = ("copper", "aluminium", "aluminum", "cu", "al")
CONTROLLER_ROLES = ("feeder", "bank")  # the runs each controller has its own of


class Table:
    """One TOML table being read: typed getters, and a check for unknown keys."""

    def __init__(self, where: str, label: str, data):
        if not isinstance(data, dict):
            raise InputError(where, label, f"expected a table, got {type(data).__name__}")
        self.where, self.label, self.data = where, label, data
        self.used: set[str] = set()

    def field(self, key: str) -> str:
        return f"{self.label}.{key}" if self.label else key

    def has(self, key: str) -> bool:
        return key in self.data

    def number(self, key, default=None, *, positive=False, minimum=None, maximum=None, integer=False,
               allow_zero=True, hint=None):
        """A number; ``hint(value)`` may name the unit a value out of [minimum, maximum] was typed in."""
        self.used.add(key)
        if key not in self.data:
            if default is None:
                self._misspelt(key)
                raise InputError(self.where, self.field(key), "is missing (expected a number)")
            return default
        value = self.data[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(self.where, self.field(key), f"expected a number, got {value!r}")
        if not math.isfinite(value):
            raise InputError(self.where, self.field(key), f"expected a finite number, got {value!r}")
        if integer and int(value) != value:
            raise InputError(self.where, self.field(key), f"expected a whole number, got {value!r}")
        if positive and value <= 0:
            raise InputError(self.where, self.field(key), f"must be greater than zero, got {value!r}")
        if not allow_zero and value == 0:
            raise InputError(self.where, self.field(key), "must not be zero")
        if minimum is not None and value < minimum:
            raise InputError(self.where, self.field(key), with_hint(f"must be at least {minimum:g}, got {value!r}",
                                                                    hint and hint(value)))
        if maximum is not None and value > maximum:
            raise InputError(self.where, self.field(key), with_hint(f"must be at most {maximum:g}, got {value!r}",
                                                                    hint and hint(value)))
        return int(value) if integer else float(value)

    def text(self, key, default=None, choices=None):
        self.used.add(key)
        if key not in self.data:
            if default is None:
                self._misspelt(key)
                raise InputError(self.where, self.field(key), "is missing (expected text)")
            return default
        value = self.data[key]
        if not isinstance(value, str):
            raise InputError(self.where, self.field(key), f"expected text, got {value!r}")
        if choices is not None and value not in choices:
            raise InputError(self.where, self.field(key), f"expected one of {', '.join(choices)}, got {value!r}"
                                                          f"{did_you_mean(value, choices)}")
        return value

    def _misspelt(self, key):
        """Before calling a required key missing: is it there under a misspelling?"""
        typo = nearest(key, set(self.data) - self.used)
        if typo is not None:
            raise InputError(self.where, self.field(typo), f"unknown key; did you mean {key!r}?")

    def finish(self):
        unknown = sorted(set(self.data) - self.used)
        if unknown:
            raise InputError(self.where, self.field(unknown[0]),
                             f"unknown key{did_you_mean(unknown[0], self.used)} "
                             "(README.md describes the file format)")


def read_toml(path, kind: str = "system") -> tuple[dict, str]:
    """Parse a TOML file; any failure is an InputError naming the file.

    The file is read once within `inputs.MAX_TOML_BYTES`, and its shape is
    checked before the parser runs (`inputs.check_toml_shape`).
    """
    path = Path(path)
    where = str(path)
    raw = read_bounded(path, MAX_TOML_BYTES, kind)
    if not raw.strip():
        raise InputError(where, None, "is empty (expected a TOML system description)")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(where, None, "is not UTF-8 text (expected a TOML file)") from None
    check_toml_shape(text, where)
    try:
        return tomllib.loads(text), where
    except tomllib.TOMLDecodeError as exc:
        mixed = _mixed_tables(text)
        if mixed:
            raise InputError(where, f"[{mixed}]", f"give one [{mixed}] table or several [[{mixed}]] tables, "
                                                  "not both") from None
        raise InputError(where, None, f"is not valid TOML: {exc}") from None


_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_-]+)\s*\]\]?\s*(?:#.*)?$", re.MULTILINE)


def _mixed_tables(text: str) -> str | None:
    """A section written both as ``[name]`` and ``[[name]]``, which TOML refuses with a cryptic message."""
    single = {m.group(2) for m in _HEADER.finditer(text) if m.group(1) == "["}
    listed = {m.group(2) for m in _HEADER.finditer(text) if m.group(1) == "[["}
    both = sorted(single & listed)
    return both[0] if both else None


def parse_module(table: Table, base_dir: Path, _seen: frozenset = frozenset()) -> Module:
    """A module from datasheet values, single-diode parameters, or another file.

    ``file = "..."`` is read relative to the file that names it.
    """
    where = table.where
    if table.has("file"):
        ref = table.text("file")
        table.finish()
        path = (base_dir / ref).resolve()
        if path in _seen:
            raise InputError(where, table.field("file"), f"refers back to {ref!r}: module files form a loop")
        data, ref_where = read_toml(base_dir / ref, "module")
        if "module" not in data:
            raise InputError(ref_where, "[module]", "is missing (expected the module's datasheet values)")
        extra = sorted(set(data) - {"module"})
        if extra:
            raise InputError(ref_where, extra[0], f"unknown section{did_you_mean(extra[0], ['module'])} "
                                                  "(a module file holds only [module])")
        return parse_module(Table(ref_where, "[module]", data["module"]), path.parent, _seen | {path})
    name = table.text("name", "")
    has_ds = any(table.has(k) for k in (*DATASHEET_KEYS, *DATASHEET_OPTIONAL) if k != "cells_in_series")
    has_p = any(table.has(k) for k in PARAMETER_KEYS if k != "cells_in_series")
    if has_ds and has_p:
        raise InputError(where, table.label, "give either datasheet values or single-diode parameters, not both")
    if has_p:
        values = {k: table.number(k, integer=(k == "cells_in_series")) for k in PARAMETER_KEYS}
        values.update({k: table.number(k) for k in PARAMETER_OPTIONAL if table.has(k)})
        table.finish()
        return module_from_parameters(DiodeParameters(**values), where, name)
    values = {k: table.number(k, integer=(k == "cells_in_series")) for k in DATASHEET_KEYS}
    values.update({k: table.number(k) for k in DATASHEET_OPTIONAL if table.has(k)})
    fuse = table.number("max_series_fuse_a", float("nan"), positive=True, maximum=1000.0)
    table.finish()
    return fit_datasheet(Datasheet(name=name, **values, max_series_fuse_a=None if math.isnan(fuse) else fuse), where)


def _conditions(table: Table):
    g = table.number("irradiance_w_m2", float("nan"), minimum=IRRADIANCE_RANGE_W_M2[0],
                     maximum=IRRADIANCE_RANGE_W_M2[1], hint=irradiance_hint)
    t = table.number("cell_temp_c", float("nan"), minimum=CELL_TEMP_RANGE_C[0], maximum=CELL_TEMP_RANGE_C[1],
                     hint=_temperature_hint(CELL_TEMP_RANGE_C))
    if not math.isnan(g):
        note(table.where, table.field("irradiance_w_m2"), design_irradiance_note(g))
    return (None if math.isnan(g) else g), (None if math.isnan(t) else t)


def _temperature_hint(valid_c):
    return lambda value: temperature_hint(value, *valid_c)


def parse_group(table: Table, default_name: str) -> StringGroup:
    name = table.text("name", default_name)
    if not name.strip():
        raise InputError(table.where, table.field("name"), "must not be empty")
    n_s = table.number("modules_per_string", integer=True, positive=True, maximum=MAX_MODULES_PER_STRING)
    n_p = table.number("strings", integer=True, positive=True, maximum=MAX_STRINGS)
    g, t = _conditions(table)
    group = StringGroup(name, n_s, n_p, g, t,
                        tilt_deg=table.number("tilt_deg", 0.0, minimum=0.0, maximum=90.0),
                        azimuth_deg=table.number("azimuth_deg", 180.0, minimum=0.0, maximum=360.0),
                        mounting=table.text("mounting", "open_rack", choices=_mountings()))
    table.finish()
    return group


def _mountings() -> tuple[str, ...]:
    """The cell-temperature presets a group may name (the sky model's table, read when needed)."""
    from pvsource.sky import MOUNTING_PRESETS

    return tuple(MOUNTING_PRESETS)


def parse_site(table: Table) -> Site:
    """A ``[site]``: where the array is, for solar position and transposition."""
    site = Site(
        name=table.text("name", ""),
        latitude=table.number("latitude", minimum=-90.0, maximum=90.0),
        longitude=table.number("longitude", minimum=-180.0, maximum=180.0),
        altitude_m=table.number("altitude_m", 0.0, minimum=-500.0, maximum=9000.0),
        albedo=table.number("albedo", 0.2, minimum=0.0, maximum=1.0),
    )
    table.finish()
    return site


def parse_cable(table: Table, index: int, group_names, controller_names=(), several: bool = False) -> CableRun:
    """A ``[[cable]]`` table: a size and material, or a resistance per km, or both (the resistance wins).

    With ``several`` controllers, a feeder or bank run names the controller
    it serves (one of ``controller_names``).
    """
    where = table.where
    group = table.text("group", "") or None
    role = table.text("role", "home-run" if group else "feeder", choices=ROLES)
    controller = _run_controller(table, role, controller_names, several)
    if role in GROUP_ROLES:
        if group is None:
            if len(group_names) > 1:
                raise InputError(where, table.field("group"),
                                 f"a {role} run must name its group: one of {', '.join(group_names)}")
            group = group_names[0]
        elif group not in group_names:
            raise InputError(where, table.field("group"),
                             f"no group named {group!r}; expected one of {', '.join(group_names)}")
    elif group is not None:
        raise InputError(where, table.field("group"), f"a {role} run serves the whole array; remove the group")

    size = None
    if table.has("size"):
        try:
            size = conductors.parse_size(table.text("size"), where=where)
        except InputError as exc:
            raise InputError(where, table.field("size"), exc.expected) from None
    material = table.text("material", "copper")
    if material.lower() not in MATERIAL_NAMES:
        raise InputError(where, table.field("material"), f"expected one of copper, aluminium, got {material!r}")
    material = conductors.material_properties(material.lower()).name
    temp_c = table.number("temp_c", conductors.DEFAULT_CONDUCTOR_TEMP_C, minimum=CONDUCTOR_TEMP_RANGE_C[0],
                          maximum=CONDUCTOR_TEMP_RANGE_C[1], hint=_temperature_hint(CONDUCTOR_TEMP_RANGE_C))
    conductor_class = int(table.number("conductor_class", 2, integer=True))
    if conductor_class not in conductors.STRANDING_FACTORS:
        raise InputError(where, table.field("conductor_class"),
                         f"expected one of {sorted(conductors.STRANDING_FACTORS)} (IEC 60228 class)")
    basis = table.text("resistance_basis", "table", choices=conductors.RESISTANCE_BASES)
    if table.has("resistance_ohm_per_km"):
        r_km = table.number("resistance_ohm_per_km", positive=True, maximum=1.0e5)
        source = "given as resistance_ohm_per_km"
    elif size is not None:
        r, source = conductors.size_resistance(size, material, temp_c, conductor_class, basis, where=where)
        r_km = 1000.0 * float(r)
    else:
        raise InputError(where, table.field("size"),
                         "is missing: give the conductor size (e.g. \"10 AWG\" or \"6 mm2\") "
                         "or resistance_ohm_per_km")
    ampacity = table.number("ampacity_a", float("nan"), positive=True, maximum=1.0e5)
    installed = {}
    for key in ("insulation_c", "ambient_c", "termination_c"):
        if table.has(key):
            installed[key] = table.number(key)
    if table.has("conductors_together"):
        installed["conductors_together"] = table.number("conductors_together", integer=True, positive=True)
    if table.has("install"):
        installed["install"] = table.text("install", choices=ampacity_tables.INSTALLS)
    if table.has("protection"):
        installed["protection"] = table.text("protection", choices=tuple(ampacity_tables.PROTECTIONS))
    ampacity_tables.check_installation(ampacity_tables.Installation(**installed), where,
                                       {k: table.field(k) for k in installed})
    if size is not None:
        ampacity_tables.check_series(size.series, installed, where, {k: table.field(k) for k in installed})
    fuse = table.number("fuse_a", float("nan"), positive=True, maximum=1.0e5)
    interrupting = table.number("fuse_interrupting_a", float("nan"), positive=True, maximum=1.0e7)
    # Many installers measure in feet: length_ft is the same one-way length, never beside length_m.
    if table.has("length_ft"):
        if table.has("length_m"):
            raise InputError(where, table.field("length_ft"), "give length_m or length_ft, not both")
        length_m = table.number("length_ft", positive=True, maximum=MAX_LENGTH_M / FOOT_M) * FOOT_M
    else:
        length_m = table.number("length_m", positive=True, maximum=MAX_LENGTH_M)
    run = CableRun(
        name=table.text("name", f"cable {index + 1}"),
        role=role,
        length_m=length_m,
        resistance_ohm_per_km=r_km,
        group=group,
        conductors_in_parallel=table.number("conductors_in_parallel", 1, integer=True, positive=True, maximum=100),
        size=size, material=material, temp_c=temp_c, conductor_class=conductor_class,
        ampacity_a=None if math.isnan(ampacity) else ampacity,
        resistance_basis=basis, resistance_source=source, installed=tuple(sorted(installed.items())),
        fuse_a=None if math.isnan(fuse) else fuse,
        fuse_interrupting_a=None if math.isnan(interrupting) else interrupting,
        controller=controller,
    )
    table.finish()
    return run


def _run_controller(table: Table, role: str, controller_names, several: bool) -> str | None:
    """The controller a feeder or bank run serves: required with several controllers, refused elsewhere."""
    where = table.where
    name = table.text("controller", "") or None
    if name is None:
        if several and role in CONTROLLER_ROLES:
            raise InputError(where, table.field("controller"),
                             f"a {role} run must name its controller: one of {', '.join(controller_names)}")
        return None
    if role not in CONTROLLER_ROLES:
        why = "follows its group's controller" if role in GROUP_ROLES else "carries every controller's current"
        raise InputError(where, table.field("controller"), f"a {role} run {why}; remove the controller")
    if name not in controller_names:
        known = ", ".join(controller_names) if controller_names else "none: name the [controller] first"
        raise InputError(where, table.field("controller"),
                         f"no controller named {name!r}; expected one of {known}{did_you_mean(name, controller_names)}")
    return name


def parse_controller(table: Table) -> Controller:
    """A ``[controller]``: its kind and behaviour, or just input limits for the checks."""
    where = table.where
    kind = table.text("kind", "") or None
    if kind is not None and kind not in KINDS:
        raise InputError(where, table.field("kind"), f"expected one of {', '.join(KINDS)}, got {kind!r}")
    max_v = table.number("max_input_v", float("nan"), positive=True, maximum=1.0e4)
    min_v = table.number("min_input_v", float("nan"), minimum=0.0, maximum=1.0e4)
    max_a = table.number("max_output_a", float("nan"), positive=True, maximum=1.0e5)
    rated = table.number("rated_power_w", float("nan"), positive=True, maximum=1.0e7)
    max_isc = table.number("max_input_isc_a", float("nan"), positive=True, maximum=1.0e5)
    curve = DEFAULT_EFFICIENCY_CURVE
    if table.has("efficiency") and table.has("efficiency_curve"):
        raise InputError(where, table.field("efficiency"), "give efficiency or efficiency_curve, not both")
    if table.has("efficiency"):
        eta = table.number("efficiency", minimum=0.5, maximum=1.0)
        curve = ((0.0, eta), (1.0, eta))
    elif table.has("efficiency_curve"):
        table.used.add("efficiency_curve")
        raw = table.data["efficiency_curve"]
        ok = isinstance(raw, list) and len(raw) >= 2 and all(
            isinstance(pt, list) and len(pt) == 2 and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                          and math.isfinite(v) for v in pt) for pt in raw)
        if not ok:
            raise InputError(where, table.field("efficiency_curve"),
                             "expected a list of [output fraction, efficiency] pairs, e.g. [[0.1, 0.92], [1.0, 0.96]]")
        fractions = [float(pt[0]) for pt in raw]
        etas = [float(pt[1]) for pt in raw]
        if any(b <= a for a, b in zip(fractions, fractions[1:])) or min(fractions) < 0:
            raise InputError(where, table.field("efficiency_curve"), "output fractions must rise from 0 or more")
        if not all(0.0 < e <= 1.0 for e in etas):
            raise InputError(where, table.field("efficiency_curve"), "efficiencies must lie in (0, 1]")
        curve = tuple(zip(fractions, etas))
    controller = make_controller(
        kind, name=table.text("name", ""),
        max_input_v=None if math.isnan(max_v) else max_v, min_input_v=None if math.isnan(min_v) else min_v,
        max_output_a=None if math.isnan(max_a) else max_a, efficiency_curve=curve,
        rated_power_w=None if math.isnan(rated) else rated,
        max_input_isc_a=None if math.isnan(max_isc) else max_isc,
        min_headroom_v=table.number("min_headroom_v", 2.0, minimum=0.0, maximum=100.0),
        diode_drop_v=table.number("diode_drop_v", 0.0, minimum=0.0, maximum=5.0),
    )
    if controller.max_input_v is not None and controller.min_input_v is not None \
            and controller.min_input_v >= controller.max_input_v:
        raise InputError(where, table.field("min_input_v"), "must be below max_input_v")
    if not controller.tracks:
        for key in ("max_output_a", "rated_power_w", "efficiency", "efficiency_curve", "min_headroom_v"):
            if table.has(key):
                raise InputError(where, table.field(key), "applies to kind = \"mppt\" only")
    elif controller.max_output_a is None and controller.rated_power_w is None:
        raise InputError(where, table.field("max_output_a"),
                         "is missing: a tracking controller needs max_output_a (or rated_power_w)")
    if controller.tracks and table.has("diode_drop_v"):
        raise InputError(where, table.field("diode_drop_v"), "applies to kind = \"direct\" or \"pwm\" only")
    table.finish()
    return controller


def parse_bank(table: Table) -> Bank:
    """A ``[bank]``: chemistry preset, cells, strings, capacity, state of charge, temperature, overrides."""
    where = table.where
    chemistry = table.text("chemistry", choices=CHEMISTRIES)
    overrides = {}
    if table.has("overrides"):
        table.used.add("overrides")
        raw = table.data["overrides"]
        if not isinstance(raw, dict):
            raise InputError(where, table.field("overrides"), "expected a table of preset values to replace")
        overrides = dict(raw)
    # The low-voltage disconnect has keys of its own; they replace the chemistry's defaults.
    direct = {}
    for key in ("min_soc", "reconnect_soc"):
        if table.has(key):
            if key in overrides:
                raise InputError(where, table.field(key), f"given twice: here and as overrides.{key}")
            direct[key] = table.number(key, minimum=0.0, maximum=1.0)
    overrides.update(direct)
    table.used.add("air_offset_c")  # optional, and known to the misspelling hint
    values = dict(
        cells_in_series=table.number("cells_in_series", integer=True, positive=True, maximum=1000),
        strings=table.number("strings", integer=True, positive=True, maximum=1000),
        capacity_ah=table.number("capacity_ah", positive=True, maximum=1.0e6),
        soc=table.number("soc", minimum=0.0, maximum=1.0),
        temp_c=table.number("temp_c", 25.0, minimum=BANK_TEMP_RANGE_C[0], maximum=BANK_TEMP_RANGE_C[1],
                            hint=_temperature_hint(BANK_TEMP_RANGE_C)),
        air_offset_c=table.number("air_offset_c", minimum=-20.0, maximum=40.0) if table.has("air_offset_c") else None,
    )
    table.finish()
    try:
        return make_bank(chemistry, overrides=overrides, where=where, **values)
    except InputError as exc:
        if exc.field and exc.field.startswith("overrides.") and exc.field[10:] in direct:
            exc = InputError(where, exc.field[10:], exc.expected)
        field = exc.field if exc.field and exc.field.startswith("[") else f"[bank].{exc.field}" if exc.field else "[bank]"
        raise InputError(where, field, exc.expected) from None


def _pairs(table: Table, key: str, example: str) -> tuple[tuple[float, float], ...]:
    """A list of [x, y] number pairs, x strictly rising; at least two."""
    table.used.add(key)
    raw = table.data[key]
    ok = isinstance(raw, list) and len(raw) >= 2 and all(
        isinstance(pt, list) and len(pt) == 2 and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                      and math.isfinite(v) for v in pt) for pt in raw)
    if not ok:
        raise InputError(table.where, table.field(key), f"expected a list of {example}")
    xs = [float(pt[0]) for pt in raw]
    if any(b <= a for a, b in zip(xs, xs[1:])):
        raise InputError(table.where, table.field(key), "the first values of the pairs must rise")
    return tuple((float(x), float(y)) for x, y in raw)


def parse_generator(table: Table) -> Generator:
    """A ``[generator]``: when it runs, its charger, and how its fuel is counted."""
    where = table.where
    soc_hint = lambda v: "a state of charge is a fraction: 30 % is 0.3" if 1.0 < v <= 100.0 else None  # noqa: E731
    start = table.number("start_soc", minimum=0.0, maximum=1.0, hint=soc_hint)
    stop = table.number("stop_soc", minimum=0.0, maximum=1.0, hint=soc_hint)
    if stop <= start:
        raise InputError(where, table.field("stop_soc"), f"must be above start_soc ({start:g}), got {stop:g}")
    if stop > MAX_STOP_SOC:
        raise InputError(where, table.field("stop_soc"),
                         f"must be at most {MAX_STOP_SOC:g}, got {stop:g}: the bank's acceptance tapers to nothing "
                         "at full charge, so a charge to full would never end")
    if table.has("charger_current_a") and table.has("charger_power_w"):
        raise InputError(where, table.field("charger_power_w"), "give charger_current_a or charger_power_w, not both")
    if not (table.has("charger_current_a") or table.has("charger_power_w")):
        table._misspelt("charger_current_a")
        raise InputError(where, table.field("charger_current_a"),
                         "is missing: give the charger's DC current into the bank (or charger_power_w)")
    current = table.number("charger_current_a", float("nan"), positive=True, maximum=1.0e5)
    power = table.number("charger_power_w", float("nan"), positive=True, maximum=1.0e7)
    rated = table.number("rated_power_w", float("nan"), positive=True, maximum=1.0e7)
    if table.has("fuel_l_per_h") and table.has("fuel_curve"):
        raise InputError(where, table.field("fuel_curve"), "give fuel_l_per_h or fuel_curve, not both")
    fuel = table.number("fuel_l_per_h", float("nan"), positive=True, maximum=1000.0)
    curve = ()
    if table.has("fuel_curve"):
        curve = _pairs(table, "fuel_curve", "[load fraction, l/h] pairs, e.g. [[0.25, 0.9], [0.5, 1.4], [1.0, 2.4]]")
        if curve[0][0] < 0.0 or curve[-1][0] > 1.0:
            raise InputError(where, table.field("fuel_curve"), "load fractions must lie from 0 to 1 (rated power)")
        rates = [r for _, r in curve]
        if min(rates) <= 0.0 or any(b < a for a, b in zip(rates, rates[1:])):
            raise InputError(where, table.field("fuel_curve"),
                             "fuel rates [l/h] must be above 0 and must not fall as the load rises")
        if math.isnan(rated):
            raise InputError(where, table.field("rated_power_w"),
                             "is missing: a fuel_curve's load fractions refer to the rated power")
    if math.isnan(fuel) and not curve and math.isnan(rated):
        raise InputError(where, table.field("fuel_l_per_h"),
                         "is missing: give fuel_l_per_h, a fuel_curve with rated_power_w, or rated_power_w alone "
                         "for the linear fuel law")
    gen = Generator(
        start_soc=start, stop_soc=stop,
        charger_current_a=None if math.isnan(current) else current,
        charger_power_w=None if math.isnan(power) else power,
        charger_efficiency=table.number("charger_efficiency", Generator.charger_efficiency, minimum=0.5, maximum=1.0),
        min_run_h=table.number("min_run_h", 0.0, minimum=0.0, maximum=48.0),
        rated_power_w=None if math.isnan(rated) else rated,
        fuel_l_per_h=None if math.isnan(fuel) else fuel, fuel_curve=curve, name=table.text("name", ""))
    table.finish()
    return gen


def parse_load(table: Table) -> Load:
    kind = table.text("kind", "mpp", choices=LOAD_KINDS)
    if kind == "mpp":
        load = Load("mpp")
    elif kind == "resistor":
        load = Load("resistor", resistance_ohm=table.number("resistance_ohm", positive=True, maximum=1e9))
    elif kind == "voltage":
        load = Load("voltage", emf_v=table.number("voltage_v", positive=True, maximum=1e5))
    else:
        load = Load("battery", resistance_ohm=table.number("resistance_ohm", minimum=0.0, maximum=1e3),
                    emf_v=table.number("emf_v", positive=True, maximum=1e5))
    table.finish()
    return load


def _item_label(kind: str, index: int, data) -> str:
    """``[[cable]] "array to bank"`` for a named table in a list, ``[[cable]] #3`` for an unnamed one."""
    name = data.get("name") if isinstance(data, dict) else None
    if isinstance(name, str) and name.strip():
        return f'[[{kind}]] "{name}"'
    return f"[[{kind}]] #{index + 1}"


def parse_system(data: dict, where: str, base_dir: Path) -> System:
    """Build a :class:`System` from parsed TOML; errors name ``where`` and the field."""
    top = Table(where, "", data)
    name = top.text("name", "")
    top.used.update({"module", "array", "group", "cable", "load", "controller", "bank", "site", "generator"})
    unknown = sorted(set(data) - top.used)
    if unknown:
        raise InputError(where, f"[{unknown[0]}]",
                         f"unknown section or key{did_you_mean(unknown[0], top.used)} (check the spelling)")
    if "module" not in data:
        raise InputError(where, "[module]", "is missing (expected the module's datasheet values)")
    module = parse_module(Table(where, "[module]", data["module"]), base_dir)

    if "array" in data and "group" in data:
        raise InputError(where, "[array]", "give either one [array] or a list of [[group]] tables, not both")
    if "array" in data:
        groups = [parse_group(Table(where, "[array]", data["array"]), "array")]
    elif "group" in data:
        raw = data["group"]
        if not isinstance(raw, list) or not raw:
            raise InputError(where, "[[group]]", "expected one or more [[group]] tables")
        groups = [parse_group(Table(where, _item_label("group", k, g), g), f"group {k + 1}") for k, g in enumerate(raw)]
        names = [g.name for g in groups]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise InputError(where, "[[group]].name", f"group names must be unique; {dup[0]!r} repeats")
    else:
        raise InputError(where, "[array]", "is missing (expected modules_per_string and strings)")
    group_names = [g.name for g in groups]

    labelled = parse_controllers(data, where, group_names)
    several = len(labelled) > 1
    names = tuple(c.name for _, c in labelled if c.name)
    raw_cables = data.get("cable", [])
    if not isinstance(raw_cables, list):
        raise InputError(where, "[[cable]]", "expected a list of [[cable]] tables")
    cables = [parse_cable(Table(where, _item_label("cable", k, c), c), k, group_names, names, several)
              for k, c in enumerate(raw_cables)]
    load = parse_load(Table(where, "[load]", data["load"])) if "load" in data else Load("mpp")
    bank = parse_bank(Table(where, "[bank]", data["bank"])) if "bank" in data else None
    if bank is not None:
        if "load" in data:
            raise InputError(where, "[load]", "a [bank] is the load; give one or the other")
        if not labelled:
            raise InputError(where, "[controller].kind", "a [bank] needs a controller: kind = direct, pwm or mppt")
        v_abs, _ = bank_charge_voltages(bank, bank.temp_c)
        for label, (_, controller) in zip(_controller_labels(data), labelled):
            if controller.kind is None:
                raise InputError(where, f"{label}.kind", "a [bank] needs a controller: kind = direct, pwm or mppt")
            if several and not controller.regulates:
                raise InputError(where, f"{label}.kind",
                                 f"a {controller.kind} connection cannot share the bank with other controllers "
                                 "(nothing would regulate it): use pwm or mppt, or one [controller]")
            if controller.max_input_v is not None and controller.max_input_v <= float(v_abs):
                raise InputError(where, f"{label}.max_input_v",
                                 f"{controller.max_input_v:g} V is not above the bank's {float(v_abs):.1f} V "
                                 "absorption voltage: the controller could never charge it")
    else:
        for label, (_, controller) in zip(_controller_labels(data), labelled):
            if controller.kind is not None:
                raise InputError(where, f"{label}.kind", "a controller kind needs a [bank] to charge")
    site = parse_site(Table(where, "[site]", data["site"])) if "site" in data else None
    if several:
        one, assigned = None, tuple(ControllerGroups(c, g) for g, c in labelled)
    else:
        one, assigned = (labelled[0][1] if labelled else None), ()
    generator = parse_generator(Table(where, "[generator]", data["generator"])) if "generator" in data else None
    if generator is not None and bank is None:
        raise InputError(where, "[generator]", "a generator charges a [bank]; add one, or remove the generator")
    if generator is not None and generator.start_soc <= bank.chemistry.min_soc:
        raise InputError(where, "[generator].start_soc",
                         f"must be above the bank's min_soc ({bank.chemistry.min_soc:g}), got {generator.start_soc:g}: "
                         "the loads are disconnected there, so the state of charge would never fall to the start")
    return System(module=module, groups=tuple(groups), cables=tuple(cables), load=load, name=name, source=where,
                  controller=one, bank=bank, site=site, controllers=assigned, generator=generator)


def _controller_labels(data) -> list[str]:
    """How messages name each controller table: ``[controller]``, or ``[[controller]] "east"``."""
    raw = data.get("controller")
    if isinstance(raw, list):
        return [_item_label("controller", k, c) for k, c in enumerate(raw)]
    return ["[controller]"]


def parse_controllers(data: dict, where: str, group_names) -> list[tuple[tuple[str, ...], Controller]]:
    """Every controller with the groups it tracks, in file order; empty without one.

    A single ``[controller]`` tracks every group. Each ``[[controller]]``
    table has a unique ``name`` and ``groups = [...]``, and every group
    belongs to exactly one of them.
    """
    raw = data.get("controller")
    if raw is None:
        return []
    if isinstance(raw, dict):
        table = Table(where, "[controller]", raw)
        if table.has("groups"):
            raise InputError(where, table.field("groups"),
                             "a single [controller] tracks every group; to share the groups among controllers, "
                             "write [[controller]] tables, each with a name and its groups")
        return [(tuple(group_names), parse_controller(table))]
    if not isinstance(raw, list) or not raw:
        raise InputError(where, "[controller]", "expected a [controller] table or one or more [[controller]] tables")
    out, owner = [], {}
    for k, item in enumerate(raw):
        table = Table(where, _item_label("controller", k, item), item)
        if not table.has("name"):
            table._misspelt("name")
            raise InputError(where, table.field("name"),
                             "is missing: each [[controller]] needs a name (its feeder and bank runs name it)")
        name = table.text("name")
        if not name.strip():
            raise InputError(where, table.field("name"), "must not be empty")
        if any(c.name == name for _, c in out):
            raise InputError(where, table.field("name"), f"controller names must be unique; {name!r} repeats")
        groups = _group_list(table, group_names)
        for g in groups:
            if g in owner:
                raise InputError(where, table.field("groups"),
                                 f"group {g!r} is already tracked by [[controller]] {owner[g]!r}; "
                                 "each group belongs to exactly one controller")
            owner[g] = name
        out.append((groups, parse_controller(table)))
    left = [g for g in group_names if g not in owner]
    if left:
        raise InputError(where, "[[controller]].groups",
                         f"group {left[0]!r} belongs to no controller; list it in the groups of one [[controller]]")
    return out


def _group_list(table: Table, group_names) -> tuple[str, ...]:
    """A ``groups = [...]`` list of known, distinct group names."""
    table.used.add("groups")
    if "groups" not in table.data:
        table._misspelt("groups")
        raise InputError(table.where, table.field("groups"),
                         f"is missing (expected the groups this controller tracks, e.g. "
                         f"groups = [{', '.join(repr(g) for g in group_names[:1])}])")
    raw = table.data["groups"]
    if not isinstance(raw, list) or not raw or not all(isinstance(g, str) for g in raw):
        raise InputError(table.where, table.field("groups"), f"expected a list of group names, got {raw!r}")
    for g in raw:
        if g not in group_names:
            raise InputError(table.where, table.field("groups"),
                             f"no group named {g!r}; expected one of {', '.join(group_names)}"
                             f"{did_you_mean(g, group_names)}")
    repeated = sorted({g for g in raw if raw.count(g) > 1})
    if repeated:
        raise InputError(table.where, table.field("groups"), f"group {repeated[0]!r} is listed twice")
    return tuple(raw)


def load_system(path) -> System:
    """Read and validate a system file.

    Parameters
    ----------
    path : str or Path
        A TOML file with ``[module]``, ``[array]`` or ``[[group]]``, optional
        ``[[cable]]`` and ``[load]``.

    Raises
    ------
    InputError
        Naming the file and the field.
    """
    data, where = read_toml(path)
    return parse_system(data, where, Path(path).parent)


def load_module(path) -> Module:
    """Read a datasheet file (a ``[module]`` table) and fit or accept its parameters."""
    data, where = read_toml(path, "datasheet")
    if "module" not in data:
        raise InputError(where, "[module]", "is missing (expected the module's datasheet values)")
    extra = sorted(set(data) - {"module"})
    if extra:
        raise InputError(where, extra[0], f"unknown section{did_you_mean(extra[0], ['module'])} "
                                          "(a datasheet file holds only [module])")
    return parse_module(Table(where, "[module]", data["module"]), Path(path).parent,
                        frozenset({Path(path).resolve()}))
