"""Names people type: one spelling for one thing, old spellings as aliases, and the nearest name for a typo.

Variables of ``sweep --over`` and ``explore --vary`` are spelt like the keys
of the system file (``modules_per_string``, ``cell_temp_c``); a hyphen may
stand for an underscore. This module imports nothing heavy.
"""

from __future__ import annotations

import difflib

from pvsource.errors import InputError

# Close enough to be a typo of a known name (difflib's ratio, 0..1).
TYPO_CUTOFF = 0.7


def nearest(word: str, known) -> str | None:
    """The known name closest to ``word``, if it is close enough to be its typo."""
    matches = difflib.get_close_matches(word, sorted(set(known)), n=1, cutoff=TYPO_CUTOFF)
    return matches[0] if matches else None


def did_you_mean(word: str, known) -> str:
    """``"; did you mean 'x'?"`` or an empty string."""
    match = nearest(word, known)
    return f"; did you mean {match!r}?" if match else ""


def canonical(text: str, names, aliases: dict, option: str, noun: str = "variable") -> str:
    """The canonical spelling of a variable name, or an InputError naming the option.

    Parameters
    ----------
    text : str
        The name as typed; ``size:RUN`` keeps RUN verbatim (a run's own name).
    names : sequence of str
        Canonical names; ``size:RUN`` stands for every ``size:`` name.
    aliases : dict
        Older or other spellings (hyphens already turned into underscores) to canonical names.
    option : str
        The option the name came with, for messages.
    noun : str
        What the name is called in messages ("variable", "key").
    """
    raw = text.strip()
    if raw.startswith("size:"):
        return raw
    key = raw.replace("-", "_")
    key = aliases.get(key, key)
    if key in names:
        return key
    raise InputError(option, None, f"unknown {noun} {raw!r}{did_you_mean(key, [*names, *aliases])}; "
                                   f"expected one of {', '.join(names)}")
