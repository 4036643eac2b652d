"""The ``pvsource`` command line: thin commands that parse, call the library, format.

Every input problem ends as one line on stderr and exit code 2; a solver that
cannot give a trustworthy number ends with one line and exit code 1. Nothing
here computes physics.

The numerical libraries (numpy, pandas, pvlib, scipy, matplotlib, numba,
pyarrow) are imported inside the commands that use them, so ``--version`` and
``--help`` answer at once (``bench/bench_startup.py`` measures it).

Option names follow one rule: an option that sets a key of the system file or
of the JSON output is spelt like that key, with hyphens (``--cell-temp-c``,
``--irradiance-w-m2``, ``--min-air-c``); every temperature option ends in
``-c`` [degC]. Earlier spellings still work (:data:`OPTION_ALIASES`).
"""

from __future__ import annotations

import json
import logging
import math
import sys
import warnings
from dataclasses import replace
from enum import StrEnum
from pathlib import Path
from typing import Annotated, Optional

import typer

try:  # Typer 0.26 and later carry their own copy of Click.
    from typer._click import exceptions as _cli_errors
except ImportError:  # pragma: no cover - older Typer depends on Click itself
    from click import exceptions as _cli_errors

# Exit and Abort live in Typer itself or in Click, depending on the version.
_EXITS = tuple({typer.Exit, getattr(_cli_errors, "Exit", typer.Exit)})
_ABORTS = tuple({typer.Abort, getattr(_cli_errors, "Abort", typer.Abort), KeyboardInterrupt})

from pvsource import __version__, cautions
from pvsource.errors import NOTES, ConvergenceError, EnvironmentFailure, InputError, PhysicsGuardError, note
from pvsource.inputs import MAX_WEATHER_MB, recording
from pvsource.outfolder import environment_reason, open_run
from pvsource.units import (
    CELL_TEMP_RANGE_C, IRRADIANCE_RANGE_W_M2, design_irradiance_note, irradiance_hint,
    temperature_hint, with_hint,
)

app = typer.Typer(
    name="pvsource",
    help="PV strings as nonlinear sources: operating points, Thevenin/Norton equivalents and losses "
         "for systems with battery banks.",
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    # Plain help: Rich markup would read "[degC]" or "[site]" as a style tag and drop it.
    rich_markup_mode=None,
)

# Earlier spellings of options, still accepted; help shows only the current name.
OPTION_ALIASES = {"--irradiance": "--irradiance-w-m2", "--cell-temp": "--cell-temp-c",
                  "--min-temp": "--min-air-c", "--max-temp": "--max-air-c", "--cell-rise": "--cell-rise-c",
                  "--fuel-price": "--fuel-price-per-l", "--unmet-value": "--unmet-value-per-kwh"}
# explore's default lifetime [years]; --years says why.
LIFETIME_YEARS = 10.0


def _choices(name: str, values) -> type[StrEnum]:
    """A fixed set of option values, listed as such in the help and checked by the parser."""
    return StrEnum(name, {v: v for v in values}, module=__name__)


BadRows = _choices("BadRows", ("fail", "fill", "skip"))
TRANSPOSITIONS = ("perez", "haydavies", "isotropic")
Transposition = _choices("Transposition", TRANSPOSITIONS)
TIME_LABELS = ("start", "middle", "end", "instant")
TimeLabel = _choices("TimeLabel", TIME_LABELS)
Material = _choices("Material", ("copper", "aluminium", "aluminum"))
Engine = _choices("Engine", ("local", "dask"))
ResistanceBasis = _choices("ResistanceBasis", ("table", "computed"))
Install = _choices("Install", ("raceway", "free-air", "A1", "A2", "B1", "B2", "C", "E"))
Protection = _choices("Protection", ("gpv", "gg", "breaker"))


def _with_aliases(argv: list[str]) -> list[str]:
    """``argv`` with earlier option spellings replaced by the current ones (up to a ``--``)."""
    out = []
    for k, arg in enumerate(argv):
        if arg == "--":
            return out + argv[k:]
        name, sep, value = arg.partition("=")
        out.append(OPTION_ALIASES.get(name, name) + sep + value if name in OPTION_ALIASES else arg)
    return out


def _version(value: bool):
    if value:
        typer.echo(f"pvsource {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: Annotated[bool, typer.Option("--version", callback=_version, is_eager=True,
                                          help="Print the version and exit.")] = False,
):
    """pvsource command line."""


def _emit_json(obj) -> None:
    from pvsource.report import json_ready

    typer.echo(json.dumps(json_ready(obj), indent=2, allow_nan=False))


def parse_condition(values: list[str] | None, option: str):
    """``["800"]`` -> 800.0; ``["east=900", "west=400"]`` -> {"east": 900.0, "west": 400.0}.

    A bare number applies to every group; ``GROUP=VALUE`` to one group. Both
    forms may be mixed: the bare number is the default for groups not named.
    """
    if not values:
        return None
    default, per_group = None, {}
    for text in values:
        name, sep, number = text.rpartition("=")
        try:
            value = float(number)
        except ValueError:
            raise InputError(option, None, f"expected a number or GROUP=NUMBER, got {text!r}") from None
        if not math.isfinite(value):
            raise InputError(option, None, f"expected a finite number, got {text!r}")
        if sep:
            if not name.strip():
                raise InputError(option, None, f"expected GROUP=NUMBER, got {text!r}")
            if name.strip() in per_group:
                raise InputError(option, None, f"group {name.strip()!r} is given twice")
            per_group[name.strip()] = value
        elif default is not None:
            raise InputError(option, None, "a bare number may be given once; name groups as GROUP=NUMBER")
        else:
            default = value
    if not per_group:
        return default
    return {"__default__": default, **per_group}


CONDITION_OPTIONS = {
    "--irradiance-w-m2": ("irradiance_w_m2", IRRADIANCE_RANGE_W_M2, "W/m2"),
    "--cell-temp-c": ("cell_temp_c", CELL_TEMP_RANGE_C, "degC"),
}


def _conditions_for(system, parsed, option: str, default=None):
    """Turn a parsed option into what ``operating_points`` takes, checked against the file.

    Errors name the option, or the system file when neither gives a value.
    """
    attr, (lo, hi), unit = CONDITION_OPTIONS[option]
    if isinstance(parsed, dict):
        unknown = sorted(set(parsed) - {"__default__", *system.group_names})
        if unknown:
            raise InputError(option, None, f"no group named {unknown[0]!r} in {system.source}; expected one of "
                                           f"{', '.join(system.group_names)}")
        values = {g.name: parsed.get(g.name, parsed["__default__"]) for g in system.groups}
    else:
        values = {g.name: parsed for g in system.groups}
    for g in system.groups:
        if values[g.name] is None:
            values[g.name] = getattr(g, attr) if getattr(g, attr) is not None else default
        if values[g.name] is None:
            raise InputError(system.source, f"group {g.name!r}",
                             f"has no {attr} in the file; give it there or with {option}")
        value = values[g.name]
        if not lo <= value <= hi:
            hint = irradiance_hint(value) if attr == "irradiance_w_m2" else temperature_hint(value, lo, hi)
            raise InputError(option, None, with_hint(f"expected {lo:g} to {hi:g} {unit} for group {g.name!r}, "
                                                     f"got {value:g}", hint))
        if attr == "irradiance_w_m2" and parsed is not None and value != getattr(g, attr):
            note(option, None, design_irradiance_note(value))
    return values


@app.command()
def point(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file.")],
    irradiance: Annotated[Optional[list[str]], typer.Option(
        "--irradiance-w-m2", metavar="W_M2|GROUP=W_M2",
        help="Effective irradiance [W/m2]; repeat as GROUP=VALUE for per-group values. "
             "Default: the system file's.")] = None,
    cell_temp: Annotated[Optional[list[str]], typer.Option(
        "--cell-temp-c", metavar="C|GROUP=C",
        help="Cell temperature [degC]; repeat as GROUP=VALUE for per-group values. "
             "Default: the system file's.")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object (SI units) instead of tables.")] = False,
):
    """Solve the operating point at one set of conditions and show the array's Thevenin/Norton view.

    Alerts come first: each hazard the point implies (PV input above the
    controller's max_input_v or max_input_isc_a, charging below the bank's
    minimum temperature or above its rate, the bank above its absorption
    voltage, a cable above its ampacity, reverse current into a string above
    its fuse rating). Then the operating point, the charge current with each
    controller's part, stage and limit, every loss, and the linear view.
    --json gives the same as one object (alerts, controllers, ...).
    """
    from pvsource.alerts import point_alerts
    from pvsource.config import load_system
    from pvsource.module import model_notes
    from pvsource.operating import operating_points, point_record
    from pvsource.terminal import render_point

    system = load_system(system_file)
    g = _conditions_for(system, parse_condition(irradiance, "--irradiance-w-m2"), "--irradiance-w-m2")
    t = _conditions_for(system, parse_condition(cell_temp, "--cell-temp-c"), "--cell-temp-c")
    frame = operating_points(system, g, t)
    # Alerts first: the hazards this point implies come before its figures.
    rec = {"alerts": point_alerts(system, frame), **point_record(system, frame.iloc[0])}
    rec["notes"] = model_notes(system.module)
    rec["cautions"] = cautions.for_command("point", system)
    if as_json:
        _emit_json(rec)
    else:
        typer.echo(render_point(system, rec))


INSTALL_HELP = {
    "insulation_c": "Insulation temperature rating [degC]: 60, 75 or 90 (AWG, NEC 310.16 columns); 70 (PVC) or 90 "
                    "(XLPE) for metric sizes. Default 90 (PV wire, XLPE solar cable). A run's own insulation_c wins.",
    "ambient_c": "Ambient temperature around the runs [degC], for NEC 310.15(B)(1) / IEC B.52.14. Default 30 "
                 "(the tables' base).",
    "conductors_together": "Current-carrying conductors in one raceway, cable or bundle (NEC 310.15(C)(1); IEC "
                           "B.52.17 counts them as circuits of two). Default 2 (one DC circuit).",
    "install": "raceway (NEC 310.16; IEC method B1) or free-air (NEC 310.17; IEC method E), or an IEC method A1, A2, "
               "B1, B2, C, E for metric sizes. Default raceway.",
    "protection": "The fuse or breaker of a metric circuit, for IEC 60364-4-43 433.1 (I_n <= I_z, I_2 <= 1.45 I_z): "
                  "gpv (gPV fuse, IEC 60269-6), gg (gG fuse, IEC 60269-1) or breaker (IEC 60898). Default: gpv on the PV "
                  "side and in quick mode, gg on the battery side (its I_2 = 1.6 I_n asks the most of the "
                  "conductor); AWG sizes follow NEC 240. A run's own protection wins.",
}
# The installation's defaults live with the ampacity tables; None here means "the default".
InsulationOpt = Annotated[Optional[float], typer.Option("--insulation-c", help=INSTALL_HELP["insulation_c"])]
AmbientOpt = Annotated[Optional[float], typer.Option("--ambient-c", help=INSTALL_HELP["ambient_c"])]
TogetherOpt = Annotated[Optional[int], typer.Option("--conductors-together", help=INSTALL_HELP["conductors_together"])]
InstallOpt = Annotated[Optional[Install], typer.Option("--install", help=INSTALL_HELP["install"])]
ProtectionOpt = Annotated[Optional[Protection], typer.Option("--protection", help=INSTALL_HELP["protection"])]


def _installation(insulation_c, ambient_c, together, install, protection=None):
    """The command's installation (``ampacity.Installation``), defaults filled in and checked; errors name the option."""
    from pvsource import ampacity
    from pvsource.ampacity import Installation, check_installation

    insulation_c = ampacity.DEFAULT_INSULATION_C if insulation_c is None else insulation_c
    ambient_c = ampacity.DEFAULT_AMBIENT_C if ambient_c is None else ambient_c
    together = ampacity.DEFAULT_CONDUCTORS_TOGETHER if together is None else together
    install = ampacity.DEFAULT_INSTALL if install is None else str(install)
    protection = None if protection is None else str(protection)  # None: by the circuit's side
    inst = Installation(insulation_c=insulation_c, ambient_c=ambient_c, conductors_together=together, install=install,
                        protection=protection)
    try:
        return check_installation(inst, "", {"insulation_c": "--insulation-c", "ambient_c": "--ambient-c",
                                             "conductors_together": "--conductors-together", "install": "--install",
                                             "protection": "--protection"})
    except InputError as exc:
        raise InputError(exc.field, None, exc.expected) from None


def _budget_fraction(budget_pct):
    if budget_pct is None:
        return None
    if not math.isfinite(budget_pct) or not 0.0 < budget_pct < 100.0:
        raise InputError("--budget-pct", None, f"expected a percentage between 0 and 100, got {budget_pct!r}")
    return budget_pct / 100.0


@app.command()
def wire(
    system_file: Annotated[Optional[Path], typer.Argument(
        metavar="SYSTEM.toml", help="The system file; leave out for one run given by the options below.")] = None,
    budget_pct: Annotated[Optional[float], typer.Option(
        "--budget-pct", help="Voltage-drop budget per circuit [% of the circuit voltage]; the PV side and the "
                             "battery side of a controller each have their own. Default 3 (common practice).")] = None,
    irradiance: Annotated[Optional[list[str]], typer.Option(
        "--irradiance-w-m2", metavar="W_M2|GROUP=W_M2", help="Design irradiance [W/m2]; default 1000 (STC).")] = None,
    cell_temp: Annotated[Optional[list[str]], typer.Option(
        "--cell-temp-c", metavar="C|GROUP=C", help="Design cell temperature [degC]; default 25 (STC).")] = None,
    at_mpp: Annotated[bool, typer.Option(
        "--at-mpp", help="Put the array at its maximum power point instead of the system's own load or bank.")] = False,
    current: Annotated[Optional[float], typer.Option(
        "--current", help="One run: the circuit's maximum current [A] (for a PV circuit, 1.25 x Isc); the drop is "
                          "taken at it and the conductor must carry 1.25 x it.")] = None,
    length_m: Annotated[Optional[float], typer.Option(
        "--length-m", help="One run: one-way route length of the two-conductor circuit [m].")] = None,
    length_ft: Annotated[Optional[float], typer.Option(
        "--length-ft", help="One run: the one-way length in feet, instead of --length-m.")] = None,
    size: Annotated[Optional[str], typer.Option(
        "--size", help='One run: conductor size, e.g. "10 AWG", "2/0 AWG", "250 kcmil", "6 mm2".')] = None,
    material: Annotated[Material, typer.Option("--material", help="One run: the conductor metal.")] = Material.copper,
    temp_c: Annotated[float, typer.Option("--temp-c", help="One run: conductor temperature [degC].")] = 75.0,
    volts: Annotated[Optional[float], typer.Option(
        "--volts", help="One run: circuit voltage the drop is compared with [V].")] = None,
    parallel: Annotated[int, typer.Option("--parallel", help="One run: conductors in parallel per pole.")] = 1,
    resistance_basis: Annotated[ResistanceBasis, typer.Option(
        "--resistance-basis", help="One run: table (IEC 60228 or NEC Chapter 9 Table 8, the default) or computed "
                                   "(resistivity, area and stranding).")] = ResistanceBasis.table,
    insulation_c: InsulationOpt = None,
    ambient_c: AmbientOpt = None,
    conductors_together: TogetherOpt = None,
    install: InstallOpt = None,
    protection: ProtectionOpt = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object instead of tables.")] = False,
):
    """Voltage drop, loss and ampacity of every cable run; the sizes by ampacity and by drop, and the larger."""
    from pvsource.runs import DEFAULT_DROP_BUDGET, FOOT_M, quick_record, wire_record
    from pvsource.terminal import render_quick_wire, render_wire

    budget = _budget_fraction(budget_pct)
    material, resistance_basis = str(material), str(resistance_basis)
    inst = _installation(insulation_c, ambient_c, conductors_together, install, protection)
    if length_ft is not None:
        if length_m is not None:
            raise InputError("--length-ft", None, "give --length-m or --length-ft, not both")
        if not math.isfinite(length_ft) or length_ft <= 0:
            raise InputError("--length-ft", None, f"expected a one-way length above 0, got {length_ft!r}")
        length_m = length_ft * FOOT_M
    single = {"--current": current, "--length-m": length_m, "--length-ft": length_ft, "--size": size, "--volts": volts,
              "--material": None if material == "copper" else material,
              "--temp-c": None if temp_c == 75.0 else temp_c, "--parallel": None if parallel == 1 else parallel,
              "--resistance-basis": None if resistance_basis == "table" else resistance_basis}
    if system_file is None:
        missing = [k for k in ("--current", "--length-m", "--size") if single[k] is None]
        if missing:
            raise InputError(missing[0], None, "is needed without a system file (or give SYSTEM.toml)")
        for name, given in (("--irradiance-w-m2", irradiance), ("--cell-temp-c", cell_temp), ("--at-mpp", at_mpp)):
            if given:
                raise InputError(name, None, "applies to a system file; one run is given by its current")
        rec = quick_record(current, length_m, size, material, temp_c, volts, budget, parallel,
                           resistance_basis=resistance_basis, installation=inst)
        rec["cautions"] = cautions.for_command("quick-wire")
        _emit_json(rec) if as_json else typer.echo(render_quick_wire(rec))
        return
    given = [k for k, v in single.items() if v is not None]
    if given:
        raise InputError(given[0], None, "describes one run without a system file; the system file's runs are used")
    from pvsource.config import load_system
    from pvsource.operating import operating_points
    from pvsource.system import Load

    system = load_system(system_file)
    if at_mpp:
        system = replace(system, load=Load("mpp"), bank=None)
    # The design point is STC unless the options say otherwise: the file's
    # own conditions describe an example hour, not a design case.
    stc_system = replace(system, groups=tuple(replace(grp, irradiance_w_m2=None, cell_temp_c=None)
                                              for grp in system.groups))
    g_opt = parse_condition(irradiance, "--irradiance-w-m2")
    t_opt = parse_condition(cell_temp, "--cell-temp-c")
    g = _conditions_for(stc_system, g_opt, "--irradiance-w-m2", default=1000.0)
    t = _conditions_for(stc_system, t_opt, "--cell-temp-c", default=25.0)
    row = operating_points(system, g, t).iloc[0]
    rec = wire_record(system, row, DEFAULT_DROP_BUDGET if budget is None else budget, inst)
    if at_mpp or (system.bank is None and system.load.kind == "mpp"):
        point = "the array's maximum power point"
    else:
        point = "the system's own " + ("bank and controller" if system.bank is not None else "load")
    shown = ", ".join(f"{grp.name} {row[f'group_{grp.name}_irradiance_w_m2']:g} W/m2 "
                      f"{row[f'group_{grp.name}_cell_temp_c']:g} degC" for grp in system.groups)
    conditions = f"{point} at {shown}" + (" (STC)" if g_opt is None and t_opt is None else "")
    rec["design_point"] = {"conditions": conditions, "at_mpp": point.endswith("maximum power point"), "v": float(row["v"]),
                           "i": float(row["i"]), "generated_w": float(row["generated_w"])}
    rec["cautions"] = cautions.for_command("wire", system)
    _emit_json(rec) if as_json else typer.echo(render_wire(system, rec, conditions))


PLOT_SUFFIXES = (".png", ".svg", ".pdf")


@app.command()
def sweep(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file.")],
    over: Annotated[str, typer.Option(
        "--over", metavar="VARIABLE",
        help="load_resistance_ohm, bank_emf_v (a bank wired straight to the array), bank_class_v (nominal 12/24/48 V), "
             "soc, modules_per_string, size:RUN, irradiance_w_m2 or cell_temp_c; spelt like explore's --vary keys (a "
             "hyphen may stand for an underscore).")],
    start: Annotated[str, typer.Option("--from", help="First value (a size such as \"6 mm2\" for size:RUN).")],
    stop: Annotated[str, typer.Option("--to", help="Last value.")],
    steps: Annotated[int, typer.Option("--steps", help="Number of values (sizes, bank classes and modules per string step along their own series).")] = 25,
    irradiance: Annotated[Optional[list[str]], typer.Option(
        "--irradiance-w-m2", metavar="W_M2|GROUP=W_M2", help="Conditions for the sweep; default: the file's.")] = None,
    cell_temp: Annotated[Optional[list[str]], typer.Option(
        "--cell-temp-c", metavar="C|GROUP=C", help="Conditions for the sweep; default: the file's.")] = None,
    plot: Annotated[Optional[Path], typer.Option("--plot", metavar="FILE.png|.svg|.pdf",
                                                 help="Draw power and efficiency against the swept value and "
                                                      "against the matching ratio.")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print the rows as JSON instead of a table.")] = False,
):
    """Sweep one variable: delivered power, efficiency, matching ratio and charge current, exact and linearised."""
    from pvsource.config import load_system
    from pvsource.report import json_ready
    from pvsource.sweep import run_sweep, variable_name
    from pvsource.terminal import render_sweep

    over = variable_name(over)
    system = load_system(system_file)
    if plot is not None:
        if plot.suffix.lower() not in PLOT_SUFFIXES:
            raise InputError("--plot", None, f"expected a file name ending {', '.join(PLOT_SUFFIXES)}, "
                                             f"got {str(plot)!r}")
        if not (plot.parent if str(plot.parent) else Path(".")).is_dir():
            raise InputError("--plot", None, f"the folder {str(plot.parent)!r} does not exist")
        if plot.resolve() == Path(system_file).resolve():
            raise InputError("--plot", None, "would overwrite the system file")
    g = t = None
    if irradiance is not None or over != "irradiance_w_m2":
        parsed = parse_condition(irradiance, "--irradiance-w-m2")
        g = None if parsed is None else _conditions_for(system, parsed, "--irradiance-w-m2")
    if cell_temp is not None or over != "cell_temp_c":
        parsed = parse_condition(cell_temp, "--cell-temp-c")
        t = None if parsed is None else _conditions_for(system, parsed, "--cell-temp-c")
    rows, design = run_sweep(system, over, start, stop, steps, g, t)
    records = json_ready(rows.to_dict(orient="records"))
    if plot is not None:
        from pvsource.plots import sweep_figure
        sweep_figure(rows, design, plot, f"{system.name or system.source}: sweep over {over}")
    if as_json:
        _emit_json({"variable": over, "unit": design["unit"], "changes": design["changes"],
                    "replaced": design["replaced"], "design_point": design, "rows": records,
                    "plot": str(plot) if plot is not None else None,
                    "cautions": cautions.for_command("sweep", system)})
    else:
        typer.echo(render_sweep(system, rows, design, plot))


def _progress(label: str):
    """A one-line progress bar on stderr for long runs (only on a terminal)."""
    if not sys.stderr.isatty():
        return None

    def report(done: int, total: int) -> None:
        width = 30
        filled = int(width * done / max(total, 1))
        sys.stderr.write(f"\r{label} [{'#' * filled}{'.' * (width - filled)}] {done}/{total}")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()

    return report


def _options(params: dict) -> dict:
    """A command's parameters as the run manifest records them."""
    return {k: (str(v) if isinstance(v, Path) else v) for k, v in params.items()}


MAX_WEATHER_HELP = f"Largest weather file accepted [MB]; default {MAX_WEATHER_MB}."


def _max_weather(value: float) -> float:
    if not math.isfinite(value) or not 0 < value <= 1e6:
        raise InputError("--max-weather-mb", None, f"expected a size above 0 and at most 1000000 MB, got {value!r}")
    return value


def _season_outputs(system, weather, out: Path, force: bool, transposition: str, as_json: bool,
                    command: str, options: dict, inputs=(), steps_csv: bool = False) -> None:
    from pvsource.report import OUTPUT_NAMES, write_season
    from pvsource.terminal import render_season

    with open_run(out, force, command, options, inputs, OUTPUT_NAMES) as run:
        folder = run.path
        result, written = write_season(folder, system, weather, transposition=transposition, steps_csv=steps_csv,
                                       progress=_progress("season"))
        run.finish(written)
    if as_json:
        summary = {k: v for k, v in result.summary.items()}
        summary["out"] = str(folder)
        summary["notes"] = list(result.notes)
        summary["cautions"] = cautions.for_command("season", system)
        _emit_json(summary)
    else:
        typer.echo(render_season(system, result.summary, folder, result.notes))


# The weather options: one name for one thing in season, explore and fleet.
ColumnOption = Annotated[Optional[list[str]], typer.Option(
    "--column", metavar="NAME=CSVCOLUMN",
    help="Map one of pvsource's column names to the CSV's; a unit may follow, e.g. 'temp_air=Tamb (degF)'.")]
TzOption = Annotated[Optional[str], typer.Option(
    "--tz", help="Time zone of naive timestamps, e.g. Etc/GMT-1 or Europe/Berlin (daylight saving becomes "
                 "standard time).")]
BadRowsOption = Annotated[BadRows, typer.Option(
    "--bad-rows", help="What to do with rows that fail the checks: stop, fill short gaps, or skip them.")]
TranspositionOption = Annotated[Transposition, typer.Option(
    "--transposition", help="The sky model that turns horizontal irradiance into plane-of-array irradiance.")]
TimeLabelOption = Annotated[Optional[TimeLabel], typer.Option(
    "--time-label", help="What a CSV timestamp marks: the start, middle or end of the interval its values "
                         "average over, or an instant (the default). TMY3 and EPW are hour-ending.")]
TimeFormatOption = Annotated[Optional[str], typer.Option(
    "--time-format", metavar="PATTERN",
    help="strftime pattern of the CSV timestamps, e.g. '%d.%m.%Y %H:%M' (default: ISO 8601).")]


def _weather_reader(column, tz, policy, transposition, time_label, time_format, max_weather_mb=MAX_WEATHER_MB):
    """Check the weather options once; return a function that reads one weather file with them."""
    policy, transposition = str(policy), str(transposition)
    time_label = None if time_label is None else str(time_label)
    if transposition not in TRANSPOSITIONS:
        raise InputError("--transposition", None, f"expected one of {', '.join(TRANSPOSITIONS)}, got {transposition!r}")
    if policy not in ("fail", "fill", "skip"):
        raise InputError("--bad-rows", None, f"expected fail, fill or skip, got {policy!r}")
    if time_label is not None and time_label not in TIME_LABELS:
        raise InputError("--time-label", None, f"expected one of {', '.join(TIME_LABELS)}, got {time_label!r}")
    max_mb = _max_weather(max_weather_mb)
    columns = {}
    for text in column or []:
        name, sep, csv_name = text.partition("=")
        if not sep or not name.strip() or not csv_name.strip():
            raise InputError("--column", None, f"expected NAME=CSVCOLUMN, got {text!r}")
        columns[name.strip()] = csv_name.strip()

    def read(path):
        from pvsource.weather import read_weather

        return read_weather(path, columns=columns or None, tz=tz, policy=policy, time_label=time_label,
                            time_format=time_format, max_mb=max_mb)
    return read


@app.command()
def season(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file, with a [site].")],
    weather_file: Annotated[Path, typer.Argument(metavar="WEATHER", help="A weather CSV, TMY3 file or EPW file.")],
    out: Annotated[Path, typer.Option("--out", metavar="DIR", help="Folder for tables, figures and the report.")],
    column: ColumnOption = None,
    tz: TzOption = None,
    policy: BadRowsOption = BadRows.fail,
    transposition: TranspositionOption = Transposition.perez,
    time_label: TimeLabelOption = None,
    time_format: TimeFormatOption = None,
    steps_csv: Annotated[bool, typer.Option("--steps-csv", help="Also write every step as steps.csv (large at "
                                                                "one-minute steps; steps.parquet always has them).")] = False,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that already holds files.")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print the summary as one JSON object.")] = False,
    max_weather_mb: Annotated[float, typer.Option("--max-weather-mb", help=MAX_WEATHER_HELP)] = MAX_WEATHER_MB,
):
    """A season of weather through the whole system: energy, losses, stages, state of charge; tables, figures, report.

    The bank runs through time: charge stages (bulk, absorption, float) with
    their hours, the coulombic loss, the low-voltage disconnect and the load
    left unmet, each controller's energy and hours by limit, and a backup
    generator's hours, starts and fuel. Hours per alert lead the printed
    summary. Writes steps.parquet, hourly.csv, summary.json, monthly.csv, the
    figures, report.html and run.json into --out.
    """
    options = _options(locals())
    from pvsource.config import load_system

    read = _weather_reader(column, tz, policy, transposition, time_label, time_format, max_weather_mb)
    transposition = str(transposition)
    with recording() as inputs:
        system = load_system(system_file)
        weather = read(weather_file)
    _season_outputs(system, weather, out, force, transposition, as_json, "season", options, inputs, steps_csv)


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", metavar="DIR", help="Folder for tables, figures and the report.")]
    = Path("pvsource-demo"),
    steps_csv: Annotated[bool, typer.Option("--steps-csv", help="Also write every step as steps.csv (large at "
                                                                "one-minute steps; steps.parquet always has them).")] = False,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that already holds files.")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print the summary as one JSON object.")] = False,
    days: Annotated[Optional[int], typer.Option(
        "--days", metavar="N", help="Study only the first N days of the year (1 to 365), for a quick look.")] = None,
):
    """The whole season study on the built-in invented cabin and a synthetic, reproducible weather year.

    The same outputs as season: stages, coulombic loss, the low-voltage
    disconnect (the cabin's loads are cut off in winter), alerts, tables,
    figures and report.html. No files or network needed.
    """
    options = _options(locals())
    if days is not None and not 1 <= days <= 365:
        raise InputError("--days", None, f"expected a whole number of days from 1 to 365, got {days}")
    from pvsource.demo import demo_system, synthetic_weather

    system = demo_system()
    weather = synthetic_weather(system)
    if days is not None:
        import pandas as pd

        weather = weather[weather.index < weather.index[0] + pd.Timedelta(days=days)]
    _season_outputs(system, weather, out, force, "perez", as_json, "demo", options, steps_csv=steps_csv)


@app.command()
def explore(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file, with a [site].")],
    weather_file: Annotated[Path, typer.Argument(metavar="WEATHER", help="A weather CSV, TMY3 file or EPW file.")],
    vary: Annotated[list[str], typer.Option(
        "--vary", metavar="KEY=V1,V2,...",
        help="A choice to vary: modules_per_string, strings, size:RUN, bank_class_v (nominal 12/24/48 V), "
             "bank_capacity_ah, controller or tilt_deg; spelt like sweep's --over variables (a hyphen may stand for an "
             "underscore). Repeat for more.")],
    out: Annotated[Path, typer.Option("--out", metavar="DIR", help="Folder for the results.")],
    price_per_kg: Annotated[float, typer.Option("--price-per-kg", help="Conductor metal price per kg.")],
    energy_value: Annotated[float, typer.Option("--energy-value", help="Value of one kWh lost in the wiring.")],
    bank_price_per_kwh: Annotated[float, typer.Option(
        "--bank-price-per-kwh", help="Bank price per kWh of nominal energy (capacity x nominal voltage), bought "
                                     "once; at 0 the bank is not priced.")] = 0.0,
    fuel_price_per_l: Annotated[float, typer.Option(
        "--fuel-price-per-l", help="Generator fuel price per litre; at 0 fuel is not priced.")] = 0.0,
    unmet_value_per_kwh: Annotated[float, typer.Option(
        "--unmet-value-per-kwh", help="What one kWh of load the system cannot serve costs the owner; at 0 unmet "
                                      "load is not priced.")] = 0.0,
    years: Annotated[float, typer.Option(
        "--years", show_default=False, help=f"Years the lifetime cost counts: metal and bank once, lost energy, fuel and unmet load "
                        f"once a year each (the study's totals over its span in years). Default {LIFETIME_YEARS:g}: "
                        f"a well-kept bank's service life (common practice: lithium 10-15 years, deep-cycle "
                        f"lead-acid 5-10), so the bank is bought once within it.")] = LIFETIME_YEARS,
    budget_pct: Annotated[Optional[float], typer.Option(
        "--budget-pct", help="Exclude designs whose PV or battery circuit drops more than this at STC "
                             "[% of the circuit voltage]; default: no drop rule.")] = None,
    column: ColumnOption = None,
    tz: TzOption = None,
    policy: BadRowsOption = BadRows.fail,
    transposition: TranspositionOption = Transposition.perez,
    time_label: TimeLabelOption = None,
    time_format: TimeFormatOption = None,
    resume: Annotated[bool, typer.Option("--resume", help="Skip the combinations already in --out.")] = False,
    engine: Annotated[Engine, typer.Option(
        "--engine", help="Run on this machine's cores (local) or on dask.distributed (dask).")] = Engine.local,
    workers: Annotated[Optional[int], typer.Option("--workers", help="Processes (local) or LocalCluster workers.")]
    = None,
    scheduler: Annotated[Optional[str], typer.Option(
        "--scheduler", metavar="ADDRESS", help="A running dask scheduler, e.g. tcp://10.0.0.5:8786.")] = None,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that already holds files.")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print the ranked rows as JSON.")] = False,
    max_weather_mb: Annotated[float, typer.Option("--max-weather-mb", help=MAX_WEATHER_HELP)] = MAX_WEATHER_MB,
):
    """Every combination of design choices over a weather year, checked, ranked by lifetime cost, with the cost-energy front."""
    options = _options(locals())
    for name, value, lo, hi in (("--price-per-kg", price_per_kg, 0.0, 1e4), ("--energy-value", energy_value, 0.0, 1e4),
                                ("--bank-price-per-kwh", bank_price_per_kwh, 0.0, 1e5),
                                ("--fuel-price-per-l", fuel_price_per_l, 0.0, 1e3),
                                ("--unmet-value-per-kwh", unmet_value_per_kwh, 0.0, 1e4),
                                ("--years", years, 0.1, 100.0)):
        if not math.isfinite(value) or not lo <= value <= hi:
            raise InputError(name, None, f"expected {lo:g} to {hi:g}, got {value!r}")
    read = _weather_reader(column, tz, policy, transposition, time_label, time_format, max_weather_mb)
    from pvsource.config import load_system
    from pvsource.explore import EXPLORE_OUTPUTS, PARTS, RESUME_RECORD, parse_vary, write_results
    from pvsource.explore import explore as run_explore
    from pvsource.report import json_ready
    from pvsource.terminal import render_explore

    with recording() as inputs:
        system = load_system(system_file)

    engine, transposition = str(engine), str(transposition)
    if workers is not None and not 1 <= workers <= 1024:
        raise InputError("--workers", None, f"expected 1 to 1024, got {workers}")
    if scheduler is not None and engine != "dask":
        raise InputError("--scheduler", None, "goes with --engine dask")
    choices = parse_vary(vary, system)
    with recording() as more:
        weather = read(weather_file)
    inputs += more
    prices = {"price_per_kg": price_per_kg, "energy_value": energy_value, "bank_price_per_kwh": bank_price_per_kwh,
              "fuel_price_per_l": fuel_price_per_l, "unmet_value_per_kwh": unmet_value_per_kwh, "years": years,
              "budget_fraction": _budget_fraction(budget_pct)}
    with open_run(out, force or resume, "explore", options, inputs, EXPLORE_OUTPUTS) as run:
        folder = run.path
        ranked = run_explore(system, weather, choices, folder, prices, resume=resume, progress=_progress("explore"),
                             engine=engine, workers=workers, scheduler=scheduler, transposition=transposition,
                             fingerprint=_fingerprint(inputs, options), force=force)
        written = [*(folder / PARTS / f"{i}.parquet" for i in ranked["id"]), folder / RESUME_RECORD,
                   *write_results(folder, ranked)]
        if (~ranked["excluded"]).any():
            from pvsource.plots import pareto_figure
            written.append(pareto_figure(ranked, folder / "pareto.png"))
        run.finish(written)
    _unpriced_notes(ranked, prices)
    if "bank_class_v" in choices and system.generator is not None and system.generator.charger_current_a is not None:
        note("--vary", "bank_class_v", f"the generator's charger keeps its power: its charger_current_a "
                                       f"({system.generator.charger_current_a:g} A in the file) is scaled by the "
                                       "bank's voltage class; a controller's max_output_a stays in amps")
    rows = json_ready(ranked.to_dict(orient="records"))
    if as_json:
        _emit_json({"rows": rows, "out": str(folder), "cautions": cautions.for_command("explore", system)})
    else:
        typer.echo(render_explore(ranked, folder, years, cautions.for_command("explore", system)))


# Each priced part of an explore result: the option that prices it, the column it prices, its words and unit.
PRICED_PARTS = (("--bank-price-per-kwh", "bank_price_per_kwh", "bank_nominal_kwh", "the bank", "kWh nominal"),
                ("--fuel-price-per-l", "fuel_price_per_l", "generator_fuel_l_per_year", "generator fuel", "l/yr"),
                ("--unmet-value-per-kwh", "unmet_value_per_kwh", "unmet_load_kwh_per_year", "unmet load", "kWh/yr"))


def _unpriced_notes(ranked, prices: dict) -> None:
    """A note for each part the ranking leaves at no cost although some combination has it."""
    ok = ranked[~ranked["excluded"]]
    for option, key, column, words, unit in PRICED_PARTS:
        if prices[key] == 0 and column in ok and (ok[column] > 0).any():
            note(option, None, f"not given: {words} (up to {ok[column].max():,.1f} {unit}) "
                               f"costs nothing in the ranking")


@app.command()
def fleet(
    source: Annotated[Path, typer.Argument(
        metavar="FOLDER|MANIFEST.csv", help="A folder of NAME.toml + NAME.csv pairs, or a manifest CSV (name,system,weather).")],
    out: Annotated[Path, typer.Option("--out", metavar="DIR", help="Folder for the fleet table.")],
    column: ColumnOption = None,
    tz: TzOption = None,
    policy: BadRowsOption = BadRows.fail,
    transposition: TranspositionOption = Transposition.perez,
    time_label: TimeLabelOption = None,
    time_format: TimeFormatOption = None,
    force: Annotated[bool, typer.Option("--force", help="Write into a folder that already holds files.")] = False,
    as_json: Annotated[bool, typer.Option("--json", help="Print the table as JSON rows.")] = False,
    max_weather_mb: Annotated[float, typer.Option("--max-weather-mb", help=MAX_WEATHER_HELP)] = MAX_WEATHER_MB,
):
    """The season study over many systems and weather files, with one summary table across them."""
    options = _options(locals())
    from pvsource.config import load_system
    from pvsource.explore import fleet_table, read_fleet
    from pvsource.report import json_ready
    from pvsource.season import run_season

    transposition = str(transposition)
    from pvsource.files import write_text

    read = _weather_reader(column, tz, policy, transposition, time_label, time_format, max_weather_mb)
    with recording() as inputs:
        members = read_fleet(source)
        # Systems (and their module files) are read before the folder is opened,
        # so every input can be checked against the outputs; weather is read one
        # member at a time.
        systems = [load_system(system_file) for _, system_file, _ in members]
    with open_run(out, force, "fleet", options, inputs, ("fleet.parquet", "fleet.csv"),
                  extra_paths=[w for _, _, w in members]) as run:
        folder = run.path
        report = _progress("fleet")
        results = []
        with recording() as weathers:
            for k, ((name, _, weather_file), system) in enumerate(zip(members, systems)):
                result = run_season(system, read(weather_file), transposition=transposition, keep="summary")
                results.append((name, result.summary))
                if report:
                    report(k + 1, len(members))
        table = fleet_table(results)
        _atomic_frame(folder / "fleet.parquet", table)
        write_text(folder / "fleet.csv", table.to_csv(index=False))
        run.finish([folder / "fleet.parquet", folder / "fleet.csv"], weathers)
    fleet_cautions = cautions.for_systems("fleet", systems)
    if as_json:
        _emit_json({"rows": json_ready(table.to_dict(orient="records")), "out": str(folder),
                    "cautions": fleet_cautions})
    else:
        from pvsource.terminal import render_caution_list

        typer.echo(table.to_string(index=False, float_format=lambda v: f"{v:,.1f}"))
        typer.echo(f"\nFleet table written to {folder}")
        typer.echo(render_caution_list(fleet_cautions))


def _atomic_frame(path: Path, frame) -> None:
    from pvsource.files import atomic_write

    atomic_write(path, lambda tmp: frame.to_parquet(tmp))


# Options that do not change an explore result. Every other option does, and
# a resume reuses finished combinations only when all of those are unchanged
# (the files are compared by content; --vary picks combinations by their id).
NOT_RESULT_OPTIONS = frozenset({"system_file", "weather_file", "vary", "out", "resume", "engine", "workers",
                                "scheduler", "force", "as_json", "max_weather_mb"})


def _fingerprint(inputs, options: dict) -> dict:
    """Input hashes and the options that shape each explore result."""
    kinds: dict[str, int] = {}
    found = {}
    for r in inputs:
        kinds[r.kind] = kinds.get(r.kind, 0) + 1
        label = r.kind if kinds[r.kind] == 1 else f"{r.kind} {kinds[r.kind]}"
        found[f"the {label} file's content"] = r.sha256
    # An option given as a choice (an Enum) is kept as its word, so a refusal reads 'perez', not the class.
    found.update({f"--{k.replace('_', '-')}": getattr(v, "value", v) for k, v in options.items()
                  if k not in NOT_RESULT_OPTIONS})
    return found


@app.command()
def check(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file.")],
    min_temp: Annotated[Optional[float], typer.Option(
        "--min-air-c", help="The site's record low air temperature [degC].")] = None,
    max_temp: Annotated[Optional[float], typer.Option(
        "--max-air-c", help="The site's record high air temperature [degC].")] = None,
    cell_rise_c: Annotated[Optional[float], typer.Option(
        "--cell-rise-c", help="Cells above the air in full sun, for the hot case [degC]. Default: 1.25 x (NOCT - 20) "
                              "from the datasheet's noct_c, else 35 (common practice).")] = None,
    insulation_c: InsulationOpt = None,
    ambient_c: AmbientOpt = None,
    conductors_together: TogetherOpt = None,
    install: InstallOpt = None,
    protection: ProtectionOpt = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object instead of tables.")] = False,
):
    """Voltage, current, ampacity and protection checks; exit code 1 when any check fails, 0 when all pass."""
    if min_temp is None:
        raise InputError("--min-air-c", None, "is needed: the site's record low air temperature in degC")
    if max_temp is None:
        raise InputError("--max-air-c", None, "is needed: the site's record high air temperature in degC")
    for name, value, lo, hi in (("--min-air-c", min_temp, -70.0, 40.0), ("--max-air-c", max_temp, -20.0, 65.0),
                                ("--cell-rise-c", cell_rise_c, 0.0, 60.0)):
        if value is None:
            continue
        if not math.isfinite(value) or not lo <= value <= hi:
            hint = temperature_hint(value, lo, hi) if name != "--cell-rise-c" and math.isfinite(value) else None
            raise InputError(name, None, with_hint(f"expected {lo:g} to {hi:g} degC, got {value!r}", hint))
    if min_temp >= max_temp:
        raise InputError("--min-air-c", None, f"must be below --max-air-c ({max_temp:g} degC)")
    from pvsource.checks import all_passed, cell_rise, design_checks, design_currents, verdict_of
    from pvsource.config import load_system
    from pvsource.module import model_notes
    from pvsource.terminal import render_checks

    inst = _installation(insulation_c, ambient_c, conductors_together, install, protection)
    system = load_system(system_file)
    rise_c, rise_basis = cell_rise(system, cell_rise_c)
    checks = design_checks(system, min_temp, max_temp, cell_rise_c, inst)
    rec = {"system": system.name, "min_air_c": min_temp, "max_air_c": max_temp, "cell_rise_c": rise_c,
           "cell_rise_basis": rise_basis,
           "checks": [c.record() for c in checks], "design_currents": design_currents(system, inst),
           "all_passed": all_passed(checks), "verdict": verdict_of(checks),
           "notes": model_notes(system.module),
           "cautions": cautions.for_command("check", system)}
    _emit_json(rec) if as_json else typer.echo(render_checks(system, rec))
    if rec["all_passed"] is False:
        raise typer.Exit(1)


@app.command()
def fit(
    datasheet_file: Annotated[Path, typer.Argument(metavar="DATASHEET.toml",
                                                   help="A file with a [module] table of datasheet values.")],
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object instead of tables.")] = False,
):
    """Fit the single-diode model to a datasheet and show how well it reproduces it."""
    from pvsource.config import load_module
    from pvsource.terminal import fit_record, render_fit

    module = load_module(datasheet_file)
    rec = fit_record(module)
    if as_json:
        _emit_json(rec)
    else:
        typer.echo(render_fit(rec))


def _fail(message: str, code: int) -> None:
    sys.stderr.write("pvsource: error: " + " ".join(str(message).split()) + "\n")
    sys.exit(code)


class _NoteLines(logging.Handler):
    """Each note of the library as one line on the stderr of the moment (tests swap it)."""

    def emit(self, record: logging.LogRecord) -> None:
        sys.stderr.write("pvsource: note: " + " ".join(record.getMessage().split()) + "\n")


def main(argv: list[str] | None = None) -> None:
    """Console entry point: run the app and map every failure to one line and an exit code."""
    handler = _NoteLines()
    NOTES.addHandler(handler)
    NOTES.propagate = False
    try:
        with warnings.catch_warnings():
            # Numerical warnings are not messages for a user: results that
            # matter are guarded (convergence, energy balance) and reported.
            warnings.simplefilter("ignore")
            args = sys.argv[1:] if argv is None else list(argv)
            rc = app(args=_with_aliases(args), prog_name="pvsource", standalone_mode=False)
        # Typer turns Ctrl-C and explicit exits into a returned exit code.
        if rc == 130:
            _fail("interrupted", 130)
        if isinstance(rc, int) and rc:
            sys.exit(rc)
    except InputError as exc:
        _fail(exc.one_line(), 2)
    except _cli_errors.NoArgsIsHelpError:
        sys.exit(0)  # the help has been shown; nothing was asked
    except _cli_errors.UsageError as exc:
        # Bad or missing options and arguments: one line, not a usage screen.
        _fail(exc.format_message(), 2)
    except (ConvergenceError, PhysicsGuardError) as exc:
        _fail(str(exc), 1)
    except EnvironmentFailure as exc:
        _fail(str(exc), 3)
    except _EXITS as exc:
        sys.exit(exc.exit_code)
    except _ABORTS:
        _fail("interrupted", 130)
    except BrokenPipeError:
        sys.exit(0)
    except Exception as exc:  # noqa: BLE001 - the last line of defence: one line, never a traceback
        reason = environment_reason(exc)
        if reason is not None:  # a full or read-only disk is not a bug
            _fail(f"{getattr(exc, 'filename', None) or 'an output'}: {reason}", 3)
        _fail(f"internal error ({type(exc).__name__}: {exc}); please report it with the input that caused it", 1)
    finally:
        NOTES.removeHandler(handler)
        NOTES.propagate = True


if __name__ == "__main__":
    main()
