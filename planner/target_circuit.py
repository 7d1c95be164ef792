"""One grid point's noisy circuit from a target: what ``planner circuit`` prints and the sweep samples.

Sits at the sweep stage (it needs the target's round and basis defaults); checks every argument and
raises :class:`~planner.errors.InputError` naming the parameter (``distance``, ``rounds``,
``basis``, ``scales``), which the command line maps to its option.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Mapping

import stim

from planner.circuits import build_memory_circuit
from planner.config import COMPONENTS, Target, distance_problem, size_problem
from planner.errors import InputError
from planner.noise import NoiseModel
from planner.sweep import bases_for, rounds_for

__all__ = ["build_circuit", "check_scales"]


def check_scales(scales: Mapping[str, float]) -> dict[str, float]:
    """``scales`` checked: known component names, finite factors >= 0 (1 is today, 0 is perfect).

    >>> check_scales({"gate_2q": 0.5})
    {'gate_2q': 0.5}
    >>> check_scales({"gate2q": 0.5})
    Traceback (most recent call last):
    ...
    planner.errors.InputError: scales: unknown component 'gate2q'; did you mean 'gate_2q'? (components: gate_1q, gate_2q, readout, reset, idle, idle_measure, leakage)
    """
    out: dict[str, float] = {}
    for name, factor in scales.items():
        if name not in COMPONENTS:
            near = difflib.get_close_matches(name, COMPONENTS, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            raise InputError(f"unknown component {name!r}{hint} (components: {', '.join(COMPONENTS)})",
                             field="scales")
        if not math.isfinite(factor) or factor < 0:
            raise InputError(f"{name}={factor!r}: factor must be a finite number >= 0", field="scales")
        out[name] = float(factor)
    return out


def _is_int(x: object) -> bool:
    return isinstance(x, int) and not isinstance(x, bool)


def _checked_rounds(target: Target, *, distance: int, rounds: int | None) -> int:
    """The rounds to build at ``distance`` (the target's default when None), after checking both."""
    problem = distance_problem(distance)
    if problem:
        raise InputError(problem, field="distance")
    if rounds is not None and (not _is_int(rounds) or rounds < 1):
        raise InputError(f"{rounds} is not allowed: give an integer >= 1", field="rounds")
    r = rounds_for(target, distance) if rounds is None else rounds
    problem = size_problem(code=target.sweep.code, distance=distance, rounds=r)
    if problem is not None:
        raise InputError(problem, field="rounds" if rounds is not None else "distance")
    return r


def build_circuit(target: Target, *, distance: int, basis: str | None = None, rounds: int | None = None,
                  scales: Mapping[str, float] | None = None) -> stim.Circuit:
    """The noisy memory circuit of ``target`` at one grid point, exactly as the sweep samples it.

    ``distance``: odd, 3 to ``MAX_DISTANCE``; ``basis``: "z" or "x" (default: the target's first
    basis; the repetition code has "z" only); ``rounds``: default the target's ``sweep.rounds``,
    else the distance; ``scales``: component -> factor on today's error (1 is today, 0 is perfect).

    >>> from planner.config import EXAMPLE_TOML, parse_target
    >>> c = build_circuit(parse_target(EXAMPLE_TOML), distance=3, scales={"gate_2q": 0.5})
    >>> c.num_detectors, c.num_observables
    (24, 1)
    >>> build_circuit(parse_target(EXAMPLE_TOML), distance=4)
    Traceback (most recent call last):
    ...
    planner.errors.InputError: distance: 4 is not allowed: distances are odd integers >= 3 (odd 3 <= d <= 101)
    """
    r = _checked_rounds(target, distance=distance, rounds=rounds)
    allowed = bases_for(target)
    b = allowed[0] if basis is None else basis.strip().lower()
    if b not in allowed:
        raise InputError(f"{basis!r} is not allowed for the {target.sweep.code} code: allowed "
                         f"{', '.join(repr(x) for x in allowed)}", field="basis")
    factors = check_scales(scales or {})
    try:
        model = NoiseModel.from_target(target).with_scales(factors)
    except ValueError as exc:  # a scaled probability outside its meaningful range
        raise InputError(str(exc), field="scales") from None
    return build_memory_circuit(model, code=target.sweep.code, distance=distance, rounds=r, basis=b)
