"""The ``pvsource`` command line: thin commands that parse, call the library, format.

Every input problem ends as one line on stderr and exit code 2; a solver that
cannot give a trustworthy number ends with one line and exit code 1. Nothing
here computes physics.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Annotated, Optional

import typer

try:  # Typer 0.26 and later carry their own copy of Click.
    from typer._click import exceptions as _cli_errors
except ImportError:  # pragma: no cover - older Typer depends on Click itself
    from click import exceptions as _cli_errors

from pvsource import __version__
from pvsource.config import load_module, load_system
from pvsource.errors import ConvergenceError, InputError, PhysicsGuardError
from pvsource.operating import operating_points, point_record
from pvsource.terminal import fit_record, render_fit, render_point

app = typer.Typer(
    name="pvsource",
    help="PV strings as nonlinear sources: operating points, Thevenin/Norton equivalents and losses "
         "for systems with battery banks.",
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
)


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
    typer.echo(json.dumps(obj, indent=2, allow_nan=False))


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
        if sep:
            if not name.strip():
                raise InputError(option, None, f"expected GROUP=NUMBER, got {text!r}")
            per_group[name.strip()] = value
        elif default is not None:
            raise InputError(option, None, "a bare number may be given once; name groups as GROUP=NUMBER")
        else:
            default = value
    if not per_group:
        return default
    return {"__default__": default, **per_group}


def _conditions_for(system, parsed):
    """Turn a parsed option into what ``operating_points`` takes (unknown groups are rejected there)."""
    if not isinstance(parsed, dict):
        return parsed
    named = {k: v for k, v in parsed.items() if k != "__default__"}
    default = parsed["__default__"]
    if default is not None:
        for name in system.group_names:
            named.setdefault(name, default)
    return named


@app.command()
def point(
    system_file: Annotated[Path, typer.Argument(metavar="SYSTEM.toml", help="The system file.")],
    irradiance: Annotated[Optional[list[str]], typer.Option(
        "--irradiance", metavar="W_M2|GROUP=W_M2",
        help="Effective irradiance [W/m2]; repeat as GROUP=VALUE for per-group values. "
             "Default: the system file's.")] = None,
    cell_temp: Annotated[Optional[list[str]], typer.Option(
        "--cell-temp", metavar="C|GROUP=C",
        help="Cell temperature [degC]; repeat as GROUP=VALUE for per-group values. "
             "Default: the system file's.")] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object (SI units) instead of tables.")] = False,
):
    """Solve the operating point at one set of conditions and show the array's Thevenin/Norton view."""
    system = load_system(system_file)
    g = _conditions_for(system, parse_condition(irradiance, "--irradiance"))
    t = _conditions_for(system, parse_condition(cell_temp, "--cell-temp"))
    frame = operating_points(system, g, t)
    rec = point_record(system, frame.iloc[0])
    if as_json:
        _emit_json(rec)
    else:
        typer.echo(render_point(system, rec))


@app.command()
def fit(
    datasheet_file: Annotated[Path, typer.Argument(metavar="DATASHEET.toml",
                                                   help="A file with a [module] table of datasheet values.")],
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object instead of tables.")] = False,
):
    """Fit the single-diode model to a datasheet and show how well it reproduces it."""
    module = load_module(datasheet_file)
    rec = fit_record(module)
    if as_json:
        _emit_json(rec)
    else:
        typer.echo(render_fit(rec))


def _fail(message: str, code: int) -> None:
    sys.stderr.write("pvsource: error: " + " ".join(str(message).split()) + "\n")
    sys.exit(code)


def main(argv: list[str] | None = None) -> None:
    """Console entry point: run the app and map every failure to one line and an exit code."""
    try:
        app(args=argv, prog_name="pvsource", standalone_mode=False)
    except InputError as exc:
        _fail(exc.one_line(), 2)
    except _cli_errors.NoArgsIsHelpError:
        sys.exit(0)  # the help has been shown; nothing was asked
    except _cli_errors.UsageError as exc:
        # Bad or missing options and arguments: one line, not a usage screen.
        _fail(exc.format_message(), 2)
    except (ConvergenceError, PhysicsGuardError) as exc:
        _fail(str(exc), 1)
    except (_cli_errors.Exit, typer.Exit) as exc:
        sys.exit(exc.exit_code)
    except (_cli_errors.Abort, typer.Abort, KeyboardInterrupt):
        _fail("interrupted", 130)
    except BrokenPipeError:
        sys.exit(0)


if __name__ == "__main__":
    main()
