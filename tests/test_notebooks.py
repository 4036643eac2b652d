"""The notebooks run top to bottom against the current library."""

import json
import os

import pytest

from conftest import ROOT

NOTEBOOKS = sorted((ROOT / "notebooks").glob("*.ipynb"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.name)
def test_notebook_code_runs(path, monkeypatch):
    monkeypatch.chdir(path.parent)
    os.environ.setdefault("MPLBACKEND", "Agg")
    cells = json.loads(path.read_text())["cells"]
    code = "\n\n".join("".join(c["source"]) for c in cells if c["cell_type"] == "code")
    exec(compile(code, str(path), "exec"), {"__name__": "__notebook__"})
