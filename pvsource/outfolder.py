"""Output folders that hold one consistent run: locked, checked, cleaned, with a manifest.

`open_run` is the one way a command writes into a folder. Before anything is
computed it

- refuses an output that is one of the inputs (compared by real path and by
  inode, so links and ``..`` do not hide a clash);
- creates the folder (and removes it again if the run fails before writing);
- locks it with ``flock`` on the folder itself, so a second run into it is
  refused and the lock dies with a killed process;
- refuses a folder with files unless ``force`` (our own stale temporary files
  do not count, and are removed);
- checks that the folder takes a file, so a read-only or full disk is found
  before the computation, not after it;
- removes the old ``run.json`` on ``force``, so a rerun killed midway never
  leaves a manifest beside files it does not describe.

`RunFolder.finish` removes our outputs a previous run left that this one did
not write, then writes ``run.json`` last and atomically: the pvsource version,
the command and options, the hash of every input and the hash and size of every
output. A folder whose ``run.json`` matches its files is one whole run.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import json
import os
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from pvsource.errors import EnvironmentFailure, InputError
from pvsource.inputs import Read, digest_file

MANIFEST = "run.json"
PARTS = "parts"
# Our temporary names: ".NAME.XXXXXXXX" or ".STEM.XXXXXXXX.SUFFIX" (8 random characters, as pvsource.files makes them).
_TEMP = re.compile(r"^\.(?P<base>.+)\.[a-z0-9_]{8}(?P<suffix>\.[A-Za-z0-9]+)?$")
_PART = re.compile(r"^[0-9a-f]{12}\.parquet$")
_PROBE = "pvsource-probe"
_ENVIRONMENT = {errno.ENOSPC: "no space left on the device", errno.EROFS: "the file system is read-only",
                errno.EACCES: "permission denied", errno.EPERM: "operation not permitted",
                errno.EDQUOT: "disk quota exceeded"}


def environment_reason(exc: BaseException) -> str | None:
    """Words for an OSError the machine caused (full, read-only, forbidden), or None for anything else."""
    if not isinstance(exc, OSError):
        return None
    if exc.errno in _ENVIRONMENT:
        return _ENVIRONMENT[exc.errno]
    text = str(exc).lower()  # pyarrow's IO errors carry the errno only in their text
    for code, words in _ENVIRONMENT.items():
        if os.strerror(code).lower() in text:
            return words
    return None


def _is_our_temp(name: str, known: set[str]) -> bool:
    m = _TEMP.match(name)
    if not m:
        return False
    base, suffix = m.group("base"), m.group("suffix") or ""
    return base == _PROBE or base + suffix in known or bool(_PART.match(base + suffix)) or base in known


@dataclass
class RunFolder:
    """An output folder held by this run (see `open_run`)."""

    path: Path
    command: str
    options: dict
    inputs: list[Read]
    outputs: tuple[str, ...]
    created: tuple[Path, ...]
    _fd: int = -1
    written: list[Path] = field(default_factory=list)

    def finish(self, written, extra_inputs=()) -> Path:
        """Drop our stale outputs this run did not write, then write ``run.json`` (last, atomically).

        Parameters
        ----------
        written : iterable of Path
            Every file this run's results consist of (parts under ``parts/`` included).
        extra_inputs : iterable of Read
            Inputs read after `open_run` (a fleet's weather files).
        """
        written = [Path(p) for p in written]
        names = {p.name for p in written}
        for name in self.outputs:
            if name not in names and (self.path / name).is_file():
                os.remove(self.path / name)
        outputs = {}
        for p in written:
            rel = os.path.relpath(p, self.path)
            d = digest_file(p)
            outputs[rel] = {"sha256": d.sha256, "bytes": d.bytes}
        from pvsource import __version__
        manifest = {"pvsource": __version__, "command": self.command, "options": self.options,
                    "inputs": [{"kind": r.kind, "path": r.path, "sha256": r.sha256, "bytes": r.bytes}
                               for r in [*self.inputs, *extra_inputs]],
                    "outputs": dict(sorted(outputs.items()))}
        from pvsource.files import write_text
        target = write_text(self.path / MANIFEST, json.dumps(manifest, indent=2, allow_nan=False))
        return target


def _samefile(a: str, b: str) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def check_clashes(out: Path, inputs, outputs) -> None:
    """Refuse when a file the run will write is one of ``inputs`` (by real path or inode)."""
    targets = [out / name for name in (*outputs, MANIFEST)]
    real_targets = {os.path.realpath(t) for t in targets}
    parts = os.path.realpath(out / PARTS)
    for path in inputs:
        real = os.path.realpath(path)
        clash = real in real_targets or any(_samefile(path, t) for t in targets)
        clash = clash or (os.path.dirname(real) == parts and real.endswith(".parquet") and PARTS in outputs)
        if clash:
            raise InputError("--out", None, f"would overwrite the input {str(path)!r}; choose another folder")


def _holds(folder: Path, known: set[str]) -> list[str]:
    """What a folder holds that counts: everything but our stale temporary files (and an empty parts/)."""
    found = []
    for entry in os.scandir(folder):
        if _is_our_temp(entry.name, known):
            continue
        if entry.name == PARTS and entry.is_dir(follow_symlinks=False) and not _holds(Path(entry.path), known):
            continue
        found.append(entry.name)
    return found


def _remove_stale(folder: Path, known: set[str]) -> None:
    for sub in (folder, folder / PARTS):
        if sub.is_dir():
            for entry in os.scandir(sub):
                if entry.is_file(follow_symlinks=False) and _is_our_temp(entry.name, known):
                    os.remove(entry.path)


class open_run:
    """Context manager: a locked, checked output folder for one command (see the module's docstring).

    Parameters
    ----------
    out : Path
        The ``--out`` folder.
    force : bool
        Write into a folder that holds files.
    command : str
        The command name, for the manifest.
    options : dict
        The command's options, for the manifest (JSON-ready).
    inputs : list of Read
        Every input read so far (see `pvsource.inputs.recording`).
    outputs : tuple of str
        Every file name the command may write (``parts`` for explore's part files).
    extra_paths : iterable
        Inputs not yet read (a fleet's weather files), checked for clashes too.
    """

    def __init__(self, out, force: bool, command: str, options: dict, inputs, outputs, extra_paths=()):
        self.out = Path(out)
        self.force = force
        self.run = None
        self.args = (command, options, list(inputs), tuple(outputs))
        self.extra_paths = list(extra_paths)

    def __enter__(self) -> RunFolder:
        command, options, inputs, outputs = self.args
        out = self.out
        check_clashes(out, [r.path for r in inputs] + self.extra_paths, outputs)
        if out.exists() and not out.is_dir():
            raise InputError("--out", None, f"{str(out)!r} is a file, not a folder")
        created, p = [], out.absolute()
        while not p.exists():  # the folders this run makes, innermost first
            created.append(p)
            p = p.parent
        try:
            out.mkdir(parents=True, exist_ok=True)
            fd = os.open(out, os.O_RDONLY | os.O_DIRECTORY)
        except OSError as exc:
            raise EnvironmentFailure(out, f"cannot create or open the folder ({environment_reason(exc) or exc.strerror})") from None
        run = RunFolder(out, command, options, inputs, outputs, tuple(created), fd)
        self.run = run
        try:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                raise InputError("--out", None, f"{str(out)!r} is in use by another pvsource run; wait for it to end "
                                                "or choose another folder") from None
            known = set(outputs) | {MANIFEST}
            if _holds(out, known) and not self.force:
                raise InputError("--out", None, f"{str(out)!r} is not empty; give --force to write into it")
            _remove_stale(out, known)
            self._probe(out)
            if self.force and (out / MANIFEST).exists():
                os.remove(out / MANIFEST)
        except BaseException as exc:
            self.__exit__(type(exc), exc, None)
            raise
        return run

    @staticmethod
    def _probe(out: Path) -> None:
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{_PROBE}.", dir=out)
            try:
                os.write(fd, b"pvsource")
                os.fsync(fd)
            finally:
                os.close(fd)
                os.remove(tmp)
        except OSError as exc:
            raise EnvironmentFailure(out, f"cannot write into the folder ({environment_reason(exc) or exc.strerror})") from None

    def __exit__(self, kind, exc, tb):
        run, self.run = self.run, None
        if run is None:
            return False
        try:
            if exc is not None and run.created:
                # Nothing worth keeping was written: leave no empty folder behind.
                _remove_stale(run.path, set(run.outputs) | {MANIFEST})
                with contextlib.suppress(OSError):
                    (run.path / PARTS).rmdir()
                for folder in run.created:
                    with contextlib.suppress(OSError):
                        folder.rmdir()
        finally:
            os.close(run._fd)
        reason = environment_reason(exc) if exc is not None else None
        if reason and not isinstance(exc, EnvironmentFailure):
            where = getattr(exc, "filename", None) or run.path
            raise EnvironmentFailure(where, f"cannot write ({reason})") from None
        return False

