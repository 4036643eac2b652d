"""Names people type: one spelling for one thing, old spellings as aliases, and the nearest name for a typo.

Variables of ``sweep --over`` and ``explore --vary`` are spelt like the keys
of the system file (``modules_per_string``, ``cell_temp_c``); a hyphen may
stand for an underscore. Earlier spellings live in one table,
:data:`VARIABLE_ALIASES`, so a name means the same thing in every command.
This module imports nothing heavy.
"""

from __future__ import annotations

import difflib

from pvsource.errors import InputError

# Close enough to be a typo of a known name (difflib's ratio, 0..1).
TYPO_CUTOFF = 0.7

#: Earlier spellings of ``sweep --over`` and ``explore --vary`` variables (hyphens read as underscores),
#: one table for both commands. ``bank_voltage`` was the resting voltage in ``sweep`` and the nominal class
#: in ``explore``; it keeps its older, documented meaning, the resting voltage (EMF).
VARIABLE_ALIASES = {"load_resistance": "load_resistance_ohm", "bank_voltage": "bank_emf_v",
                    "bank_class": "bank_class_v", "modules": "modules_per_string", "irradiance": "irradiance_w_m2",
                    "cell_temp": "cell_temp_c", "tilt": "tilt_deg", "bank_capacity": "bank_capacity_ah"}


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
        Canonical names the option takes; ``size:RUN`` stands for every ``size:`` name.
    aliases : dict
        Older spellings (hyphens already turned into underscores) to canonical names
        (:data:`VARIABLE_ALIASES` for variables).
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
    read_as = f" (read as {key!r}, which {option} does not take)" if key != raw.replace("-", "_") else ""
    known = [*names, *(a for a, target in aliases.items() if target in names)]
    raise InputError(option, None, f"unknown {noun} {raw!r}{read_as}{did_you_mean(key, known)}; "
                                   f"expected one of {', '.join(names)}")
