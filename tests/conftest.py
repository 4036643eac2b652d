"""Shared fixtures: an invented module and small systems built in code."""

from dataclasses import replace
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


# The same module with the power coefficient the shipped examples give
# (invented): fitted by the six-parameter method, as the examples are.
SIX_PARAMETER_DATASHEET = replace(DEMO_DATASHEET, pmax_temp_coeff_pct=-0.37, name="demo, six-parameter")


@pytest.fixture(scope="session")
def demo_module():
    return fit_datasheet(DEMO_DATASHEET)


@pytest.fixture(scope="session")
def six_module():
    module = fit_datasheet(SIX_PARAMETER_DATASHEET)
    assert module.fit.method == "six_parameter" and module.parameters.adjust_pct != 0.0
    return module


@pytest.fixture(params=["five_parameter", "six_parameter"])
def any_module(request, demo_module, six_module):
    """The demo module fitted both ways: core solver tests run once with each model."""
    return demo_module if request.param == "five_parameter" else six_module


def pvlib_cec_state(p, irradiance_w_m2, cell_temp_c):
    """(I_L, I_0, R_s, R_sh, a) straight from pvlib.pvsystem.calcparams_cec: a reference beside parameters_at."""
    from pvlib import pvsystem

    return pvsystem.calcparams_cec(irradiance_w_m2, cell_temp_c, p.alpha_sc_a_per_c, p.a_ref_v, p.i_l_ref_a,
                                   p.i_o_ref_a, p.r_sh_ref_ohm, p.r_s_ohm, p.adjust_pct, EgRef=p.eg_ref_ev,
                                   dEgdT=p.degdt_per_c)


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
