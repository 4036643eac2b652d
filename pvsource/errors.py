"""The error types that cross the library's edge.

`InputError` is the one type for bad input: it carries where the problem is
(a file, and a field or row inside it) and what was expected. The CLI prints
it as one line on stderr and exits with code 2.

:func:`note` is the gentler sibling: a value that is possible but unlikely
(kW/m2 typed as W/m2) is let through and remarked on, through the
``pvsource`` logger; the CLI prints each note as one line on stderr.
"""

from __future__ import annotations

import logging

NOTES = logging.getLogger("pvsource")


class InputError(ValueError):
    """Bad input, with the place it was found and what was expected.

    Parameters
    ----------
    where : str
        The file or command-line option, e.g. ``"system.toml"`` or ``"--irradiance"``.
    field : str or None
        The field, key path or row inside it, e.g. ``"[module].v_mp"`` or ``"row 14"``.
    expected : str
        What was wrong and what was expected, in one sentence.
    """

    def __init__(self, where: str, field: str | None, expected: str):
        self.where = where
        self.field = field
        self.expected = expected
        super().__init__(self.one_line())

    def one_line(self) -> str:
        parts = [p for p in (self.where, self.field) if p]
        text = ": ".join(parts + [self.expected])
        return " ".join(text.split())


def note(where: str, field: str | None, text: str | None) -> None:
    """Remark on an unlikely input without refusing it; nothing when ``text`` is None.

    Parameters
    ----------
    where, field : str
        As for :class:`InputError`.
    text : str or None
        What is unlikely and what was probably meant.
    """
    if text:
        NOTES.warning(" ".join(": ".join(p for p in (where, field, text) if p).split()))


class ConvergenceError(RuntimeError):
    """The operating-point solver did not converge for some conditions."""


class PhysicsGuardError(RuntimeError):
    """A computed result broke a physical law or bound and was not returned."""


class EnvironmentFailure(OSError):
    """The machine refused an output: a full disk, a read-only or unwritable folder, a missing permission.

    Not a bug and not bad input: the CLI prints the path and the reason in
    one line and exits with code 3.
    """

    def __init__(self, path, reason: str):
        self.path = str(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")
