"""The limits of what planning answers for, the checks of a question's numbers against them, and
the small number helpers the answer classes share."""

from __future__ import annotations

import math
from typing import Any

from planner.config import distance_problem
from planner.errors import InputError
from planner.fits import Interval

#: largest distance planner answers for: every --distance, every search and every qubit budget
#: stops here. A distance-1001 surface code is two million physical qubits, and an answer there
#: already rests on hundreds of factors of Lambda extrapolated beyond any sampled distance.
MAX_DISTANCE = 1001
#: smallest logical error per cycle planner takes as a goal or a measurement: a rate below it
#: is beyond any reachable one (no computation runs 10^100 cycles)
MIN_RATE = 1e-100
#: model figures below this are not printed as numbers (they would underflow to 0): "below"
TINY = 1e-300
#: a lever that may get this many times worse and still meet the goal has unbounded headroom
HEADROOM_LIMIT = 1024.0
#: the cheapest-mix search lets a component improve at most 2^-MAX_HALVINGS
MAX_HALVINGS = 30.0


def _ivj(iv: Interval | None) -> dict[str, Any] | None:
    return iv.to_json() if iv is not None else None



def _ivj(iv: Interval | None) -> dict[str, Any] | None:
    return iv.to_json() if iv is not None else None


def _fin(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def _below(x: float) -> float | None:
    """``x``, or None when it is too small to print (it would read as 0)."""
    return x if x >= TINY else None


def check_distance(distance: int, *, field: str = "distance") -> None:
    """Refuse a distance planner does not answer for (odd, 3 <= d <= :data:`MAX_DISTANCE`).

    >>> check_distance(1001)
    >>> check_distance(4)
    Traceback (most recent call last):
    planner.errors.InputError: distance: 4 is not allowed: distances are odd integers >= 3 (odd 3 <= d <= 1001)
    """
    problem = distance_problem(distance, largest=MAX_DISTANCE)
    if problem is not None:
        raise InputError(problem, field=field)


def check_rate(field: str, value: float) -> None:
    """Refuse a logical error per cycle outside [:data:`MIN_RATE`, 0.5) (``field``: the parameter
    or target key it came from).

    >>> check_rate("eps_target", 0.5)
    Traceback (most recent call last):
    planner.errors.InputError: eps_target: 0.5 is not allowed: a per-cycle error rate; allowed: 1e-100 <= eps < 0.5
    """
    if not (MIN_RATE <= value < 0.5):
        raise InputError(f"{value!r} is not allowed: a per-cycle error rate", field=field,
                         allowed=f"{MIN_RATE:g} <= eps < 0.5")
