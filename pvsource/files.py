"""Writing output files atomically, with the permissions the user's umask gives.

Every output is written under a hidden temporary name in its own folder and
renamed into place, so an interrupted run never leaves a half-written file
under a real name. The temporary file is created with mode 0o666 and the
kernel applies the process umask, as for any file a program creates;
:func:`tempfile.mkstemp` would instead make it 0o600 whatever the umask.
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path


def create_temporary(path: Path, suffix: str = "") -> Path:
    """A new empty hidden file beside ``path``, never one that already exists."""
    while True:
        tmp = path.parent / f".{path.name}.{secrets.token_hex(4)}{suffix}"
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:  # pragma: no cover - 32 random bits collide rarely
            continue
        os.close(fd)
        return tmp


def atomic_write(path, write, suffix: str | None = None) -> Path:
    """Call ``write(temporary_path)``, then rename the temporary file to ``path``.

    Parameters
    ----------
    path : path-like
        The final name.
    write : callable
        Writes the whole file to the path it is given (a ``str``).
    suffix : str, optional
        Ending of the temporary name, for writers that choose the format by it
        (matplotlib). By default none: the temporary name ends in random
        letters, so a folder scan for ``*.parquet`` never picks one up.

    Returns
    -------
    Path
        ``path``. If ``write`` raises (Ctrl-C included), the temporary file is
        removed and ``path`` is left as it was.
    """
    path = Path(path)
    tmp = create_temporary(path, suffix or "")
    try:
        write(str(tmp))
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path


def write_text(path, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    return atomic_write(path, lambda tmp: Path(tmp).write_text(text, encoding="utf-8"))
