"""One spelling per name, aliases, and the nearest name for a typo."""

import pytest

from pvsource.errors import InputError
from pvsource.names import canonical, did_you_mean, nearest

NAMES = ("modules_per_string", "bank_class_v", "tilt_deg", "size:RUN")
ALIASES = {"modules": "modules_per_string"}


def test_hyphens_aliases_and_run_names():
    assert canonical("modules-per-string", NAMES, ALIASES, "--x") == "modules_per_string"
    assert canonical(" modules ", NAMES, ALIASES, "--x") == "modules_per_string"
    # A run's own name is kept as written, hyphens and all.
    assert canonical("size:roof-to-bank", NAMES, ALIASES, "--x") == "size:roof-to-bank"


def test_a_typo_gets_the_nearest_and_nonsense_gets_the_list():
    with pytest.raises(InputError, match=r"--x: unknown variable 'tilt_dge'; did you mean 'tilt_deg'\?"):
        canonical("tilt_dge", NAMES, ALIASES, "--x")
    with pytest.raises(InputError) as exc:
        canonical("wind", NAMES, ALIASES, "--x", "key")
    assert "unknown key 'wind'" in str(exc.value) and "did you mean" not in str(exc.value)
    assert "bank_class_v" in str(exc.value)


def test_nearest():
    assert nearest("lenght_m", ["length_m", "size", "name"]) == "length_m"
    assert nearest("colour", ["length_m", "size", "name"]) is None
    assert did_you_mean("colour", ["size"]) == ""
