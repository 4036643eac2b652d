"""Shared fixtures: an invented module and small systems built in code."""

from pathlib import Path

import numpy as np
import pytest

from pvsource.array import StringGroup
from pvsource.module import Datasheet, fit_datasheet
from pvsource.system import Load, System
from pvsource.wiring import CableRun

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "data"

# An invented 60-cell module (the examples' "Ashgrove AG-300"); demo numbers only.
DEMO_DATASHEET = Datasheet(v_oc=40.1, i_sc=9.8, v_mp=33.0, i_mp=9.2, isc_temp_coeff_pct=0.05,
                           voc_temp_coeff_pct=-0.29, cells_in_series=60, name="demo")


@pytest.fixture(scope="session")
def demo_module():
    return fit_datasheet(DEMO_DATASHEET)


def make_system(module, groups=((2, 2),), cables=(), load=Load("mpp")):
    """A system from (modules_per_string, strings) pairs, named g1, g2, ..."""
    gs = tuple(StringGroup(f"g{k + 1}", n_s, n_p) for k, (n_s, n_p) in enumerate(groups))
    return System(module=module, groups=gs, cables=tuple(cables), load=load, name="test")


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def cable(role, length_m, ohm_per_km, group=None):
    return CableRun(f"{role} {group or ''}", role, length_m, ohm_per_km, group)


def run_cli(capsys, *args):
    """Run the pvsource command line in-process: (exit code, stdout, stderr)."""
    from pvsource.cli import main

    with pytest.raises(SystemExit) as exc:
        main(list(args))
        raise SystemExit(0)
    out = capsys.readouterr()
    return exc.value.code or 0, out.out, out.err


def write_weather_csv(frame, path):
    """A weather frame as a CSV with ISO timestamps carrying their offsets."""
    table = frame.copy()
    table.index = table.index.map(lambda ts: ts.isoformat())
    table.index.name = "timestamp"
    table.to_csv(path)
    return path


def demo_system_file(folder):
    """The demo system file copied into ``folder``."""
    from importlib import resources

    path = folder / "system.toml"
    path.write_text((resources.files("pvsource") / "data" / "demo" / "system.toml").read_text())
    return path
