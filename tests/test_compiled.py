"""Compiled kernels cache outside the package, in the user's cache folder."""

import os
import subprocess
import sys

import pytest
from numba import config

from pvsource import compiled

from conftest import ROOT

PACKAGE = ROOT / "pvsource"


@pytest.mark.skipif(sys.platform in ("win32", "darwin"), reason="the XDG rule is for Linux and other Unix systems")
def test_the_cache_follows_the_xdg_base_directory_rule(monkeypatch, tmp_path):
    # XDG Base Directory specification: $XDG_CACHE_HOME when it is an absolute
    # path, else ~/.cache; a relative value is ignored.
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert compiled.cache_dir() == tmp_path / "pvsource" / "numba"
    monkeypatch.setenv("XDG_CACHE_HOME", "relative/cache")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert compiled.cache_dir() == tmp_path / "home" / ".cache" / "pvsource" / "numba"


def test_a_kernel_compiles_without_a_writable_cache_and_leaves_numba_as_it_was(monkeypatch, tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("")
    monkeypatch.setattr(compiled, "cache_dir", lambda: blocker / "numba")

    @compiled.kernel
    def twice(x):
        return 2 * x

    assert twice(21) == 42
    assert config.CACHE_DIR == ""


def test_a_kernel_writes_its_cache_to_the_user_folder_not_beside_its_source(tmp_path):
    # A fresh process with an empty cache folder: a kernel in a module of its
    # own compiles, and its cache files land there, none beside the module (in
    # an installed package, that stray folder is what broke the Quick start).
    source = tmp_path / "src"
    source.mkdir()
    (source / "probe.py").write_text("from pvsource.compiled import kernel\n\n\n@kernel\ndef twice(x):\n"
                                     "    return 2 * x\n")
    env = {**os.environ, "XDG_CACHE_HOME": str(tmp_path / "cache"), "PYTHONPATH": os.pathsep.join(
        [str(ROOT), str(source)])}
    env.pop("NUMBA_CACHE_DIR", None)
    done = subprocess.run([sys.executable, "-c", "import probe; print(probe.twice(21))"], env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "42"
    assert list((tmp_path / "cache" / "pvsource" / "numba").rglob("probe.twice-*.nbi"))
    assert not [p for p in source.rglob("*") if p.suffix in (".nbi", ".nbc")]


def test_every_compiled_kernel_goes_through_compiled_kernel():
    # A bare numba.njit(cache=True) would write into the package again; the
    # season's state-of-charge loop is one of these kernels.
    offenders = [p.name for p in PACKAGE.rglob("*.py")
                 if p.name != "compiled.py" and ("njit" in p.read_text() or "cache=True" in p.read_text())]
    assert offenders == []
