"""Compiled kernels, with numba's on-disk cache kept out of the installed package.

numba's ``cache=True`` writes compiled code into the ``__pycache__`` folder
beside the source file, that is, inside the installed package. pip does not
know those files, so when ``pip install -e .`` later replaces a regular install
it leaves the folder behind, and that stray ``pvsource/`` folder in
site-packages then hides the real package from every command. Every
compiled kernel in pvsource is therefore declared with :func:`kernel`, which
caches in the user's cache folder instead, or not at all.
"""

import os
import sys
import tempfile
from pathlib import Path

from numba import config, njit


def cache_dir() -> Path | None:
    """The folder for pvsource's compiled-code cache, or None where there is no home.

    The platform's per-user cache folder, then ``pvsource/numba``:
    ``$XDG_CACHE_HOME`` (when absolute, as the XDG Base Directory
    specification requires) or ``~/.cache`` on Linux and other Unix systems,
    ``~/Library/Caches`` on macOS, ``%LOCALAPPDATA%`` on Windows.
    """
    try:
        if sys.platform == "win32":
            base = Path(os.environ.get("LOCALAPPDATA") or Path.home() / "AppData" / "Local")
        elif sys.platform == "darwin":
            base = Path.home() / "Library" / "Caches"
        else:
            xdg = os.environ.get("XDG_CACHE_HOME", "")
            base = Path(xdg) if os.path.isabs(xdg) else Path.home() / ".cache"
    except RuntimeError:  # no home directory to be found
        return None
    return base / "pvsource" / "numba"


def _writable(folder: Path | None) -> bool:
    if folder is None:
        return False
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tempfile.TemporaryFile(dir=folder).close()
    except OSError:
        return False
    return True


def kernel(func):
    """``numba.njit`` with its disk cache in :func:`cache_dir`.

    A ``NUMBA_CACHE_DIR`` the user set is honoured as numba honours it. Where
    the cache folder cannot be written, the kernel is compiled afresh in each
    process (a second or two) rather than cached inside the package.
    """
    if config.CACHE_DIR:
        return njit(cache=True)(func)
    folder = cache_dir()
    if not _writable(folder):
        return njit(cache=False)(func)
    # numba picks the cache's folder once, when the function is decorated; the
    # setting is put back at once so that other libraries' kernels keep theirs.
    config.CACHE_DIR = str(folder)
    try:
        return njit(cache=True)(func)
    finally:
        config.CACHE_DIR = ""
