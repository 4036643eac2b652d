"""pvsource: photovoltaic strings as nonlinear sources, linearised at their operating point.

The library's front door:

- :func:`load_system` reads a TOML system file into a validated :class:`System`;
- :func:`operating_points` solves it at any number of conditions and returns a
  DataFrame with the operating point, the Thevenin/Norton equivalents, the
  matching ratio and the power accounting;
- :func:`load_module` reads a datasheet file and fits the single-diode model;
- :func:`read_weather` reads a weather CSV, TMY3 or EPW file, and
  :func:`run_season` runs the season study (per-step table and summary);
- :func:`demo_system` and :func:`synthetic_weather` give the built-in demo.

These names are imported on first use (PEP 562), so ``import pvsource`` and
``pvsource --version`` do not load pandas, pvlib, scipy or matplotlib.
"""

from importlib import import_module

__version__ = "0.1.0"

# Public name -> the module that defines it.
_EXPORTS = {
    "load_module": "pvsource.config", "load_system": "pvsource.config",
    "demo_system": "pvsource.demo", "synthetic_weather": "pvsource.demo",
    "ConvergenceError": "pvsource.errors", "InputError": "pvsource.errors", "PhysicsGuardError": "pvsource.errors",
    "operating_points": "pvsource.operating",
    "SeasonResult": "pvsource.season", "run_season": "pvsource.season",
    "Load": "pvsource.system", "System": "pvsource.system",
    "read_weather": "pvsource.weather",
}

__all__ = sorted([*_EXPORTS, "__version__"])


def __getattr__(name: str):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'pvsource' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted({*globals(), *_EXPORTS})
