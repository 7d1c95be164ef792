"""Moved to :mod:`planner.planning.precision` (the precision assessment is pure planning); this
name stays importable for the code that still uses it."""

from planner.planning.precision import *  # noqa: F403
from planner.planning.precision import __all__  # noqa: F401
