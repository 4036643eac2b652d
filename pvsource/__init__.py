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
"""

from pvsource.config import load_module, load_system
from pvsource.demo import demo_system, synthetic_weather
from pvsource.errors import ConvergenceError, InputError, PhysicsGuardError
from pvsource.operating import operating_points
from pvsource.season import SeasonResult, run_season
from pvsource.system import Load, System
from pvsource.weather import read_weather

__version__ = "0.1.0"

__all__ = [
    "ConvergenceError", "InputError", "Load", "PhysicsGuardError", "SeasonResult", "System",
    "demo_system", "load_module", "load_system", "operating_points", "read_weather", "run_season",
    "synthetic_weather", "__version__",
]
