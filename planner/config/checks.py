"""Checks across keys of a target that the schema alone cannot make (one of two keys, sections a
preset excludes, physical ranges, the grid's size); each names the key it refuses."""

from __future__ import annotations

from planner.config.leakage import leakage_axis_problem
from planner.config.limits import ERROR_LIMITS, MAX_PROBABILITY, MAX_TASKS, coherence_problem, size_problem
from planner.config.qubits import qubits_problem
from planner.config.schema import PRESET_NATIVE_2Q, Device, Target
from planner.errors import InputError

#: (key path, what is wrong), or None when the check passes
Problem = tuple[str, str] | None


def _gate_problem(d: Device) -> Problem:
    """Each gate error is given once: as a Pauli probability or as an RB infidelity."""
    e = d.errors
    for comp in ("gate_1q", "gate_2q"):
        direct, rb = getattr(e, comp), getattr(e, f"{comp}_infidelity")
        if direct is None and rb is None:
            return (f"device.errors.{comp}", f"missing: give {comp} (Pauli error probability) "
                    f"or {comp}_infidelity (average gate infidelity from RB)")
        if direct is not None and rb is not None:
            return f"device.errors.{comp}", f"give either {comp} or {comp}_infidelity, not both"
    return None


def _range_problem(d: Device) -> Problem:
    """Every error at most its limit (:data:`~planner.config.limits.ERROR_LIMITS`)."""
    for key, limit in ERROR_LIMITS.items():
        v = getattr(d.errors, key)
        if v is not None and v > limit:
            what = "p" if key in MAX_PROBABILITY else "value"
            return f"device.errors.{key}", f"{v} is too large: allowed 0 <= {what} <= {limit:g}"
    return None


def _budget_problem(d: Device) -> Problem:
    """A measured budget: gate errors, ranges, coherence and durations present and physical."""
    problem = _gate_problem(d) or _range_problem(d)
    if problem is not None:
        return problem
    if d.coherence is None:
        return "device.coherence", "missing section: give t1_us and t2_us (or a device.preset)"
    if d.durations is None:
        return ("device.durations", "missing section: give gate_1q_ns, gate_2q_ns, measure_ns, "
                "reset_ns (or a device.preset)")
    problem_text = coherence_problem(t1_us=d.coherence.t1_us, t2_us=d.coherence.t2_us)
    return ("device.coherence.t2_us", problem_text) if problem_text is not None else None


def _preset_problem(d: Device) -> Problem:
    """A preset is its published circuit: its own gate set, no measured sections."""
    if d.preset is None:
        return None
    native = PRESET_NATIVE_2Q[d.preset.model]
    if d.native_2q != native:
        return ("device.native_2q", f"the {d.preset.model} preset is defined on {native.upper()} "
                f"circuits: set native_2q = \"{native}\" or leave the key out")
    for section in ("coherence", "durations"):
        if getattr(d, section) is not None:
            return f"device.{section}", "not used with device.preset: remove it or the preset"
    return None


def _roadmap_problem(t: Target) -> Problem:
    for comp, rate in (t.roadmap.rates.items() if t.roadmap is not None else ()):
        if (rate.per_year is None) == (rate.halving_years is None):
            return (f"roadmap.rates.{comp}", "give exactly one of per_year (fraction of the "
                    "error removed per year, 0 <= f < 1) or halving_years (> 0)")
    return None


def _size_problem(t: Target) -> Problem:
    """Every circuit buildable on one machine, and the grid not too many tasks."""
    sw = t.sweep
    for d in sw.distances:
        for r in sw.round_counts(d):
            problem = size_problem(code=sw.code, distance=d, rounds=r)
            if problem is None:
                continue
            if sw.rounds is not None:
                return "sweep.rounds", problem
            if "round_multiples" in sw.model_fields_set:
                return "sweep.round_multiples", problem + f" (r = {r // d} x d)"
            return "sweep.distances", problem + (f" (round counts default to d and 3d: {r} rounds here; "
                                                 "round_multiples = [1] samples r = d only)")
    num_points = len(set(sw.joint_scales) | {1.0}) + len(t.components) * sum(
        1 for s in sw.component_scales if s != 1.0)
    num_rounds = len(sw.round_counts(sw.distances[0]))
    num_tasks = num_points * len(sw.distances) * num_rounds * (1 if sw.code == "repetition" else len(sw.bases))
    if num_tasks > MAX_TASKS:
        return ("sweep", f"the grid has {num_tasks:,} tasks ({num_points} scale points x "
                f"{len(sw.distances)} distances x {num_rounds} round counts x bases): at most "
                f"{MAX_TASKS:,} are allowed; use fewer scale factors, components, distances or round counts")
    return None


def _sweep_problem(t: Target) -> Problem:
    sw = t.sweep
    if sw.rounds is not None and sw.round_multiples is not None:
        return ("sweep.round_multiples", "give either rounds (one fixed round count for every "
                "distance) or round_multiples (round counts as multiples of d, e.g. [1, 3]), not both")
    if sw.code == "repetition" and "bases" in sw.model_fields_set and sw.bases != ("z",):
        return ("sweep.bases", "the repetition-code memory exists in basis 'z' only: set bases = "
                "[\"z\"] or leave the key out")
    problem = _size_problem(t) or leakage_axis_problem(has_section=t.device.leakage is not None,
                                                       components=sw.components)
    if problem is not None:
        return problem
    smallest = min(sw.distances)
    if sw.code == "surface" and 2 * smallest**2 - 1 > t.goal.max_qubits:
        return ("goal.max_qubits", f"{t.goal.max_qubits} is smaller than the smallest swept code "
                f"(d={smallest} needs {2 * smallest**2 - 1} qubits)")
    return None


def check_consistency(t: Target, source: str) -> None:
    """Raise :class:`InputError` (``source: key: problem``) for the first check that fails."""
    device = _budget_problem(t.device) if t.device.preset is None else _preset_problem(t.device)
    problem = device or qubits_problem(t) or _roadmap_problem(t) or _sweep_problem(t)
    if problem is not None:
        key, text = problem
        raise InputError(text, field=key, source=source)
