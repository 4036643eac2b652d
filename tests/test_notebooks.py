"""The notebooks run against the current library and show what their text says.

Each notebook's code runs top to bottom; the test then checks the claims its
markdown makes against pvlib and scipy (tests/reference.py), not against
pvsource's own numbers.
"""

import json
import os

import numpy as np
import pytest

import reference as ref
from conftest import ROOT

NOTEBOOKS = ROOT / "notebooks"


def run_notebook(name, monkeypatch):
    """Execute a notebook's code cells in order; return its namespace."""
    path = NOTEBOOKS / name
    monkeypatch.chdir(path.parent)
    os.environ.setdefault("MPLBACKEND", "Agg")
    cells = json.loads(path.read_text())["cells"]
    code = "\n\n".join("".join(c["source"]) for c in cells if c["cell_type"] == "code")
    namespace = {"__name__": "__notebook__"}
    exec(compile(code, str(path), "exec"), namespace)
    return namespace


def test_every_notebook_has_a_test():
    assert sorted(p.name for p in NOTEBOOKS.glob("*.ipynb")) == ["season-study.ipynb", "thevenin-view.ipynb"]


def test_thevenin_view_shows_maximum_power_transfer(monkeypatch):
    nb = run_notebook("thevenin-view.ipynb", monkeypatch)
    system, m, p, eta, generated, m_bank = (nb[k] for k in ("system", "m", "p", "eta", "generated", "m_bank"))
    # Reference: pvlib's singlediode for three modules in parallel at 800 W/m2, 45 degC.
    diode = ref.diode_at(system.module.parameters, 800.0, 45.0)
    p_mp = float(ref.key_points(diode, 1, 3)["p_mp"])
    assert nb["p_mp"] == pytest.approx(p_mp, rel=1e-9)
    # "The array's own generated power peaks at m = 1, at its maximum power
    # point": the sweep's best is within its 0.5 V step of pvlib's P_mp, and
    # m = 1 lies between the neighbours of the best step.
    k = int(generated.argmax())
    assert p_mp * 0.995 <= generated[k] <= p_mp * (1 + 1e-9)
    assert m[k - 1] < 1.0 < m[k + 1]
    # "The power reaching the bank peaks where the matching ratio seen from the
    # bank is 1". Reference: scipy's bounded maximisation of (V - I R) I through
    # the system's cables, with pvlib's i_from_v.
    best, _ = ref.max_power([ref.group(diode, 1, 3)], system.wiring.r_load_side_ohm, 45.0)
    j = int(p.argmax())
    assert best * 0.995 <= p[j] <= best * (1 + 1e-9)
    assert m_bank[j - 1] < 1.0 < m_bank[j + 1]
    assert m[j] > 1.0  # the array itself a little above its maximum power point
    # "Efficiency rises with m all along."
    assert np.all(np.diff(eta[np.argsort(m)]) > 0)


def test_season_study_curtails_on_summer_middays_above_the_mpp(monkeypatch):
    nb = run_notebook("season-study.ipynb", monkeypatch)
    system, steps, summary = nb["system"], nb["result"].steps, nb["summary"]
    (group,) = system.groups
    g = steps[f"group_{group.name}_irradiance_w_m2"].to_numpy()
    t = steps[f"group_{group.name}_cell_temp_c"].to_numpy()
    points = ref.key_points(ref.diode_at(system.module.parameters, g, t), group.modules_per_string, group.strings)
    # The energy at the MPPs is pvlib's P_mp at each step's conditions, summed
    # over the year's hours (reference: pvlib.pvsystem.singlediode).
    assert summary["energy_mpp_kwh"] == pytest.approx(np.sum(points["p_mp"]) * summary["step_h"] / 1000, rel=1e-6)
    curtailed = (steps["curtailed_w"] > 0).to_numpy()
    share = steps["curtailed_w"][curtailed] / steps["curtailed_w"].sum()
    # "Summer middays are where the tracker curtails": at 46 degrees north,
    # April to September and 10:00 to 17:00 local standard time.
    assert share[share.index.month.isin(range(4, 10))].sum() > 0.75
    assert share[(share.index.hour >= 10) & (share.index.hour < 17)].sum() > 0.75
    # "...the bank is full or the controller's current limit binds, and the
    # array is pushed up its curve toward Voc (matching ratio above 1)":
    # above pvlib's V_mp at those conditions.
    limits = set(steps["limit"][curtailed])
    assert limits <= {"bank full", "voltage regulation", "controller output current"}
    assert np.all(steps["v"].to_numpy()[curtailed] > points["v_mp"][curtailed])
    flowing = curtailed & (steps["i"].to_numpy() > 1e-6)
    assert flowing.sum() > 100 and np.all(steps["matching_ratio"].to_numpy()[flowing] > 1.0)
