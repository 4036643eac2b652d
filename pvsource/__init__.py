"""pvsource: photovoltaic strings as nonlinear sources, linearised at their operating point.

The library's front door:

- :func:`load_system` reads a TOML system file into a validated :class:`System`;
- :func:`operating_points` solves it at any number of conditions and returns a
  DataFrame with the operating point, the Thevenin/Norton equivalents, the
  matching ratio and the power accounting;
- :func:`load_module` reads a datasheet file and fits the single-diode model.
"""

from pvsource.config import load_module, load_system
from pvsource.errors import ConvergenceError, InputError, PhysicsGuardError
from pvsource.operating import operating_points
from pvsource.system import Load, System

__version__ = "0.1.0"

__all__ = [
    "ConvergenceError", "InputError", "Load", "PhysicsGuardError", "System",
    "load_module", "load_system", "operating_points", "__version__",
]
