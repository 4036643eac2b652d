"""Reading input files once, within a size limit, and remembering what was read.

Every input (system file, module file, weather, fleet manifest) goes through
`read_bounded`: it reads at most ``limit + 1`` bytes, so ``/dev/zero`` or a
runaway pipe is refused with bounded memory, and a stream or FIFO
(``<(cat w.csv)``) is read exactly once and then parsed from memory. The
content hash of each file read is kept for the run manifest (`run.json`).

The TOML parser is quadratic in the parts of a dotted key and recursive in the
depth of nested arrays; `check_toml_shape` refuses such files with a cheap scan
before the parser sees them.
"""

from __future__ import annotations

import codecs
import contextlib
import hashlib
import os
import re
import stat
from dataclasses import dataclass
from pathlib import Path

from pvsource.errors import InputError

MB = 1 << 20
# A system file or datasheet is a few kilobytes; 1 MB is far beyond any real one.
MAX_TOML_BYTES = 1 * MB
# A one-minute year as CSV is about 40 MB; two years of it fit with room to spare.
# ``--max-weather-mb`` raises it for longer files.
MAX_WEATHER_MB = 256
# TOML shape limits, checked before parsing (see `check_toml_shape`).
MAX_TOML_DEPTH = 32
MAX_KEY_PARTS = 32
MAX_KEY_CHARS = 1024


@dataclass(frozen=True)
class Read:
    """One input file as read: its name as given, role, content hash and size."""

    path: str
    kind: str
    sha256: str
    bytes: int


_RECORDERS: list[list[Read]] = []


@contextlib.contextmanager
def recording():
    """Collect every file read through `read_bounded` inside the block (in order)."""
    seen: list[Read] = []
    _RECORDERS.append(seen)
    try:
        yield seen
    finally:
        _RECORDERS.remove(seen)


def read_bounded(path, limit_bytes: int, kind: str, option: str | None = None) -> bytes:
    """The whole content of ``path``, refused beyond ``limit_bytes``.

    Parameters
    ----------
    path : str or Path
        A regular file, a FIFO or a stream (``/dev/stdin``, ``/dev/fd/N``).
    limit_bytes : int
        Largest accepted size [bytes].
    kind : str
        What the file is, for messages and the manifest (``"system"``,
        ``"weather"``, ...).
    option : str, optional
        The option that raises the limit, named in the message.

    Raises
    ------
    InputError
        When the file cannot be read, is a device, or is larger than the limit.
    """
    where = str(path)
    too_big = _too_big(where, limit_bytes, kind, option)
    try:
        with open(path, "rb") as f:
            info = os.fstat(f.fileno())
            if stat.S_ISCHR(info.st_mode) or stat.S_ISBLK(info.st_mode):
                raise InputError(where, None, f"is a device, not a {kind} file")
            if stat.S_ISREG(info.st_mode) and info.st_size > limit_bytes:
                raise too_big
            if stat.S_ISREG(info.st_mode):
                # One read of the size the file has: joining blocks would hold it twice.
                data = f.read(info.st_size + 1)
                if len(data) > info.st_size:  # it grew while read: count the rest as it comes
                    rest = _read_stream(f, limit_bytes - len(data))
                    data = None if rest is None else data + rest
            else:
                # Streams have no size: count as we go.
                data = _read_stream(f, limit_bytes)
    except IsADirectoryError:
        raise InputError(where, None, f"is a folder, not a {kind} file") from None
    except OSError as exc:
        raise InputError(where, None, f"cannot be read ({exc.strerror or exc})") from None
    if data is None or len(data) > limit_bytes:
        raise too_big
    record = Read(where, kind, hashlib.sha256(data).hexdigest(), len(data))
    for seen in _RECORDERS:
        seen.append(record)
    return data


@dataclass(frozen=True)
class OnDisk:
    """A regular file checked and hashed a block at a time but left on disk, to be parsed from its path.

    Attributes
    ----------
    path : Path
    head : bytes
        Its first 64 KiB, for sniffing the format.
    encoding : str or None
        The first of the encodings asked for that its whole content decodes in; None if none does.
    nonblank : bool
        Whether it holds anything but whitespace.
    stamp : tuple
        (inode, size, modification time [ns]) as read; see :meth:`unchanged`.
    """

    path: Path
    head: bytes
    encoding: str | None
    nonblank: bool
    stamp: tuple

    def unchanged(self) -> bool:
        """Whether the file on disk is still the one that was hashed."""
        try:
            return _stamp(os.stat(self.path)) == self.stamp
        except OSError:
            return False


def _stamp(info) -> tuple:
    return info.st_ino, info.st_size, info.st_mtime_ns


HEAD_BYTES = 65536


def scan_bounded(path, limit_bytes: int, kind: str, option: str | None = None, encodings=()) -> bytes | OnDisk:
    """Like :func:`read_bounded`, but a regular file is scanned in blocks and left on disk.

    Its hash, size and the first encoding it decodes in are found a block at
    a time (a later encoding costs a second pass only when an earlier fails), so a large file is never held whole in memory; the caller parses it
    from its path and checks :meth:`OnDisk.unchanged` afterwards. Streams,
    FIFOs and anything else are read once into memory by :func:`read_bounded`.

    Parameters
    ----------
    path, limit_bytes, kind, option
        As for :func:`read_bounded`.
    encodings : callable or sequence of str
        The text encodings to try, or a function of the file's head that gives them.
    """
    where = str(path)
    try:
        info = os.stat(path)
    except OSError:
        info = None
    if info is None or not stat.S_ISREG(info.st_mode):
        return read_bounded(path, limit_bytes, kind, option)
    too_big = _too_big(where, limit_bytes, kind, option)
    if info.st_size > limit_bytes:
        raise too_big
    digest, size, head, nonblank, names, decoder = hashlib.sha256(), 0, b"", False, None, None
    try:
        with open(path, "rb") as f:
            before = _stamp(os.fstat(f.fileno()))
            while True:
                block = f.read(MB)
                if names is None:
                    head = block[:HEAD_BYTES]
                    names = encodings(head) if callable(encodings) else tuple(encodings)
                    decoder = codecs.getincrementaldecoder(names[0])() if names else None
                if decoder is not None:
                    try:
                        decoder.decode(block, final=not block)
                    except UnicodeDecodeError:
                        decoder = None
                if not block:
                    break
                digest.update(block)
                size += len(block)
                nonblank = nonblank or re.search(rb"\S", block) is not None
                if size > limit_bytes:
                    raise too_big
            after = _stamp(os.fstat(f.fileno()))
        encoding = names[0] if decoder is not None else next(
            (n for n in names[1:] if decodes(_file_blocks(path), n)), None)
    except IsADirectoryError:
        raise InputError(where, None, f"is a folder, not a {kind} file") from None
    except OSError as exc:
        raise InputError(where, None, f"cannot be read ({exc.strerror or exc})") from None
    if after != before or after[1] != size:
        raise InputError(where, None, "changed while it was read; run again once it is complete")
    for seen in _RECORDERS:
        seen.append(Read(where, kind, digest.hexdigest(), size))
    return OnDisk(Path(path), head, encoding, nonblank, after)


def _too_big(where: str, limit_bytes: int, kind: str, option: str | None) -> InputError:
    return InputError(where, None, f"is larger than the {_size(limit_bytes)} limit for a {kind} file"
                      + (f"; raise it with {option}" if option else ""))


def decodes(blocks, encoding: str) -> bool:
    """Whether the bytes of ``blocks``, in order, are text in ``encoding``; each decoded block is dropped."""
    decoder = codecs.getincrementaldecoder(encoding)()
    try:
        for block in blocks:
            decoder.decode(block)
        decoder.decode(b"", final=True)
    except UnicodeDecodeError:
        return False
    return True


def _file_blocks(path):
    with open(path, "rb") as f:
        yield from iter(lambda: f.read(MB), b"")


def _read_stream(f, limit_bytes: int) -> bytes | None:
    """A file, pipe or FIFO to its end; None once it runs past the limit.

    Read in blocks and joined only when within the limit, so refusing an
    endless stream costs the limit in memory, not twice it.
    """
    blocks, total = [], 0
    while total <= limit_bytes:
        block = f.read1(min(MB, limit_bytes + 1 - total))
        if not block:
            return b"".join(blocks)
        blocks.append(block)
        total += len(block)
    return None


def release_memory() -> None:
    """Hand memory freed by finished work back to the operating system, where the C library allows it.

    glibc keeps freed small and medium blocks in its heap for reuse; after a
    large parse or a chunk of a study, that is tens of megabytes the process
    still counts as its own. ``malloc_trim(0)`` returns them. Elsewhere (no
    glibc) this does nothing.
    """
    global _TRIM
    if _TRIM is None:
        try:
            import ctypes

            _TRIM = ctypes.CDLL("libc.so.6").malloc_trim
        except (OSError, AttributeError):
            _TRIM = False
    if _TRIM:
        _TRIM(0)


_TRIM = None


def _size(n: int) -> str:
    return f"{n / MB:g} MB" if n >= MB else f"{n} bytes"


def _long_key(where: str, line: int) -> InputError:
    return InputError(where, f"line {line}", f"has a key longer than {MAX_KEY_PARTS} dotted parts or "
                                             f"{MAX_KEY_CHARS} characters")


def check_toml_shape(text: str, where: str) -> None:
    """Refuse TOML whose shape would make the parser slow or recurse deeply.

    A linear scan outside strings and comments: bracket depth (arrays, inline
    tables, table headers) at most `MAX_TOML_DEPTH`; a key (a run of bare-key
    characters, dots and quoted parts) at most `MAX_KEY_PARTS` dotted parts and
    `MAX_KEY_CHARS` characters. Real system files are far inside all three.
    """
    depth = parts = run = 0
    line = 1
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c in "\"'":
            triple = text.startswith(c * 3, i)
            end_mark = c * 3 if triple else c
            j = i + len(end_mark)
            while j < n:
                if c == '"' and text[j] == "\\":
                    j += 2
                    continue
                if text.startswith(end_mark, j):
                    break
                if text[j] == "\n" and not triple:
                    break
                j += 1
            # A quoted key part is one part; it is a key (not a value) when "=" or "." follows it.
            quoted = j - i - len(end_mark)
            line += text.count("\n", i, j)
            i = j + len(end_mark)
            k = i
            while k < n and text[k] in " \t":
                k += 1
            if quoted > MAX_KEY_CHARS and k < n and text[k] in "=.":
                raise _long_key(where, line)
        elif c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
        elif c in "[{":
            depth += 1
            if depth > MAX_TOML_DEPTH:
                raise InputError(where, f"line {line}", f"nests arrays or tables deeper than {MAX_TOML_DEPTH} levels")
            parts = run = 0
            i += 1
        elif c in "]}":
            depth = max(depth - 1, 0)
            parts = run = 0
            i += 1
        else:
            if c == ".":
                parts += 1
            elif c.isalnum() or c in "_- \t":
                run += 1
            else:
                if c == "\n":
                    line += 1
                parts = run = 0
            if parts >= MAX_KEY_PARTS or run > MAX_KEY_CHARS:
                raise _long_key(where, line)
            i += 1


def digest_file(path) -> Read:
    """The hash and size of a file on disk, read in blocks (for outputs)."""
    h = hashlib.sha256()
    size = 0
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(MB), b""):
            h.update(block)
            size += len(block)
    return Read(str(path), "output", h.hexdigest(), size)
