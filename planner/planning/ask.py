"""Inverting the response model: what each component must reach for a goal at a distance.

Answers are stated as scale factors on today's errors (1 = today, 0.5 = half, 0 = perfect),
solved exactly on the model (root finding and constrained minimisation with scipy). Anything
outside the sampled scale range is flagged as an extrapolation and by how much.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

from scipy.optimize import brentq

from planner.config import COMPONENTS, Target
from planner.planning.leakage import present_components
from planner.errors import InputError
from planner.fits import FitReport, Interval
from planner.planning.limits import (
    HEADROOM_LIMIT,
    MAX_DISTANCE,
    MAX_HALVINGS,
    MIN_RATE,
    TINY,
    _below,
    _fin,
    _ivj,
    check_distance,
    check_rate,
)
from planner.planning.mix import MixAnswer, cheapest_mix, cost_shares, mix_cost
from planner.planning.model import (ResponseModel, largest_distance_within, not_sampled_note, physical_qubits,
                                     qubit_rule)

__all__ = [
    "HEADROOM_LIMIT", "MAX_DISTANCE", "MAX_HALVINGS", "MIN_RATE", "TINY", "Boundary", "FactorAnswer",
    "MixAnswer", "Requirements", "TodayAnswer", "check_distance", "check_rate", "cheapest_mix",
    "choose_distance", "cost_shares", "distance_extrapolation_note", "find_boundary", "goal_distance",
    "mix_cost", "required_suppression", "requirements", "smallest_distance", "solve_lever",
    "today_answer", "what_if",
]

@dataclasses.dataclass(frozen=True, kw_only=True)
class FactorAnswer:
    """The factor one lever (``joint`` or a component alone) needs to reach the goal."""

    lever: str
    #: None when the lever is not sampled (no verdict either way)
    reachable: bool | None
    factor: float | None
    #: Lambda at the solution, or (not reachable) with the component perfect
    suppression: float
    note: str = ""
    extrapolation: tuple[str, ...] = ()
    factor_interval: Interval | None = None
    #: bootstrap interval of :attr:`suppression` (same meaning: at the solution, or perfect)
    suppression_interval: Interval | None = None
    #: False for a component without its own sweep axis: no factor, no Lambda, no verdict
    sampled: bool = True
    #: the response model exceeds its misfit limits (the answer is unreliable)
    model_misfit: bool = False
    #: the verdict flips with sampling noise or the model form (see planning.modelerror)
    marginal: bool = False
    #: which part of the interval dominates: "sampling", "model" or "" (no interval)
    interval_source: str = ""

    @property
    def verdict(self) -> str:
        """reachable, not reachable, marginal or not sampled."""
        if not self.sampled:
            return "not sampled"
        if self.marginal:
            return "marginal"
        return "reachable" if self.reachable else "not reachable"

    def to_json(self) -> dict[str, Any]:
        return {"lever": self.lever, "sampled": self.sampled, "reachable": self.reachable, "factor": self.factor,
                "verdict": self.verdict, "marginal": self.marginal, "model_misfit": self.model_misfit,
                "reliable": self.sampled and not (self.model_misfit or self.marginal),
                "interval_source": self.interval_source or None,
                "suppression_factor": _fin(self.suppression), "note": self.note,
                "extrapolation": list(self.extrapolation), "factor_interval": _ivj(self.factor_interval),
                "suppression_factor_interval": _ivj(self.suppression_interval)}


@dataclasses.dataclass(frozen=True, kw_only=True)
class TodayAnswer:
    """Today's device: Lambda (model and fitted) and the smallest code meeting the goal."""

    suppression_model: float
    suppression_fitted: Interval | None
    above_threshold: bool
    distance: int | None
    physical_qubits: int | None
    within_max_qubits: bool
    #: at the requested distance, model (None: below :data:`TINY`, the note says so)
    logical_error_per_cycle: float | None
    note: str = ""
    distance_interval: Interval | None = None
    suppression_model_interval: Interval | None = None
    logical_error_per_cycle_interval: Interval | None = None
    max_qubits: int | None = None
    model_misfit: bool = False
    interval_source: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"suppression_factor_model": _fin(self.suppression_model),
                "model_misfit": self.model_misfit, "reliable": not self.model_misfit,
                "interval_source": self.interval_source or None,
                "suppression_factor_fitted": _ivj(self.suppression_fitted),
                "above_threshold": self.above_threshold, "distance": self.distance,
                "physical_qubits": self.physical_qubits, "within_max_qubits": self.within_max_qubits,
                "logical_error_per_cycle_at_distance": _fin(self.logical_error_per_cycle),
                "note": self.note, "distance_interval": _ivj(self.distance_interval),
                "suppression_factor_model_interval": _ivj(self.suppression_model_interval),
                "logical_error_per_cycle_at_distance_interval": _ivj(self.logical_error_per_cycle_interval)}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Requirements:
    """Everything ``planner ask`` answers for one goal at one distance (``code``: the swept code,
    which decides the qubit count)."""

    eps_target: float
    distance: int
    physical_qubits: int
    distance_source: str
    #: None when beyond any float (a note says so)
    required_suppression: float | None
    joint: FactorAnswer
    components: tuple[FactorAnswer, ...]
    mix: MixAnswer
    today: TodayAnswer
    model_form: str
    model_quality: str
    notes: tuple[str, ...] = ()
    required_suppression_interval: Interval | None = None
    code: str = "surface"
    #: the response model exceeds its misfit limits: every answer here is unreliable
    model_misfit: bool = False
    #: per interval key: combined best/low/high, ``sampling_interval``, ``model_interval``, ``dominant``
    interval_parts: dict[str, dict[str, Any]] = dataclasses.field(default_factory=dict)
    #: the answers in physical units and in time (:class:`planner.planning.physical.PhysicalAnswers`)
    physical: Any = None

    @property
    def qubit_rule(self) -> str:
        """How :attr:`physical_qubits` follows from the distance ('2d^2-1' or '2d-1')."""
        return qubit_rule(self.code)

    def to_json(self) -> dict[str, Any]:
        return {"target_logical_error_per_cycle": self.eps_target, "distance": self.distance,
                "physical_qubits": self.physical_qubits, "distance_source": self.distance_source,
                "code": self.code, "qubit_rule": self.qubit_rule,
                "required_suppression_factor": _fin(self.required_suppression),
                "required_suppression_factor_interval": _ivj(self.required_suppression_interval),
                "joint": self.joint.to_json(), "components": [c.to_json() for c in self.components],
                "cheapest_mix": self.mix.to_json(), "today": self.today.to_json(),
                "model": {"form": self.model_form, "quality": self.model_quality, "misfit": self.model_misfit},
                "model_misfit": self.model_misfit, "intervals": dict(self.interval_parts),
                "physical": self.physical.to_json() if self.physical is not None else None,
                "notes": list(self.notes)}


# ---------------------------------------------------------------------------------------------


def choose_distance(target: Target, *, distance: int | None = None, qubits: int | None = None) -> tuple[int, str]:
    """The distance to answer for, and where it came from: ``distance`` as given, else the largest
    odd one whose code (the target's ``sweep.code``) fits in ``qubits`` or ``goal.max_qubits``,
    at most :data:`MAX_DISTANCE`."""
    if distance is not None and qubits is not None:
        raise InputError("given together with a distance: give one of them, not both", field="qubits")
    if distance is not None:
        check_distance(distance)
        return distance, "given"
    code = target.sweep.code
    name, limit = ("qubits", qubits) if qubits is not None else ("goal.max_qubits", target.goal.max_qubits)
    if isinstance(limit, bool) or not isinstance(limit, int):
        raise InputError(f"{limit!r} is not allowed: a whole number of physical qubits", field=name)
    source = f"{'from --qubits' if qubits is not None else 'from goal.max_qubits'} ({limit})"
    d = largest_distance_within(min(limit, physical_qubits(MAX_DISTANCE + 2, code) - 1), code)
    if d is None:
        raise InputError(f"{limit} qubits is fewer than the {physical_qubits(3, code)} a "
                         f"distance-3 {code} code needs ({qubit_rule(code)})", field=name)
    if physical_qubits(MAX_DISTANCE + 2, code) <= limit:
        source += f", capped at d = {MAX_DISTANCE}, the largest planner answers for"
    return d, source


def goal_distance(target: Target) -> int:
    """The distance of the target's own goal: the largest odd d whose code (``sweep.code``) fits in
    goal.max_qubits, between 3 and :data:`MAX_DISTANCE` (roadmap and sensitivity plan for it).

    >>> from planner.config import EXAMPLE_TOML, parse_target
    >>> goal_distance(parse_target(EXAMPLE_TOML))  # 2*21^2-1 = 881 <= 1000 qubits
    21
    """
    found = largest_distance_within(target.goal.max_qubits, target.sweep.code) or 3
    return min(found, MAX_DISTANCE)


def what_if(target: Target, *, eps_target: float | None = None, distance: int | None = None,
            qubits: int | None = None) -> dict[str, Any]:
    """The options that ask a different question than the target's goal (a what-if), the others
    dropped: a --target equal to the goal's rate, a --qubits equal to goal.max_qubits or a
    --distance equal to the goal distance ask the review's own question.

    >>> from planner.config import EXAMPLE_TOML, parse_target
    >>> t = parse_target(EXAMPLE_TOML)  # goal 1e-6 within 1000 qubits: d = 21
    >>> what_if(t, eps_target=1e-6, distance=21), what_if(t, distance=15)
    ({}, {'distance': 15})
    """
    asked: dict[str, Any] = {}
    if eps_target is not None and eps_target != target.goal.logical_error_per_cycle:
        asked["eps_target"] = eps_target
    if qubits is not None and qubits != target.goal.max_qubits:
        asked["qubits"] = qubits
    if distance is not None and (qubits is not None or distance != goal_distance(target)):
        asked["distance"] = distance
    return asked


def _scaled(comp: str, f: float) -> dict[str, float]:
    return {c: (f if comp in ("joint", c) else 1.0) for c in COMPONENTS}


def smallest_distance(model: ResponseModel, scales: Mapping[str, float] | None, eps_target: float) -> int | None:
    """Smallest odd distance whose predicted eps meets ``eps_target`` (None if none up to
    :data:`MAX_DISTANCE` or the point is above threshold)."""
    if model.suppression(scales) <= 1:
        return 3 if model.ln_eps(scales, 3) <= math.log(eps_target) else None
    ln_t = math.log(eps_target)
    for d in range(3, MAX_DISTANCE + 1, 2):
        if model.ln_eps(scales, d) <= ln_t:
            return d
    return None


@dataclasses.dataclass(frozen=True, kw_only=True)
class Boundary:
    """Where a monotone ``h(f)`` (ln eps minus ln goal, increasing in the factor ``f``) crosses 0.

    ``kind``: ``needed`` (``factor`` < 1 meets the goal), ``headroom`` (met today; ``factor`` >= 1
    is how much worse it may get), ``unbounded`` (met even :data:`HEADROOM_LIMIT` times worse:
    ``factor`` None) or ``unreachable`` (not met even at ``lowest``: ``factor`` None).
    """

    kind: str
    factor: float | None


def find_boundary(h: Callable[[float], float], *, lowest: float = 0.0) -> Boundary:
    """The one boundary search of planning: the factor where ``h`` changes sign.

    >>> round(find_boundary(lambda f: f - 0.25).factor, 12)
    0.25
    >>> find_boundary(lambda f: f - 3.0).kind, find_boundary(lambda f: -1.0).kind
    ('headroom', 'unbounded')
    >>> find_boundary(lambda f: 1.0).kind
    'unreachable'
    """
    if h(1.0) <= 0:
        # met today: the headroom (how much worse the factor could get)
        top = 1.0
        while top < HEADROOM_LIMIT and h(top * 2) <= 0:
            top *= 2
        if top >= HEADROOM_LIMIT:
            return Boundary(kind="unbounded", factor=None)
        return Boundary(kind="headroom", factor=float(brentq(h, top, top * 2, xtol=1e-12, rtol=1e-10)))
    if not h(lowest) <= 0:
        return Boundary(kind="unreachable", factor=None)
    return Boundary(kind="needed", factor=float(brentq(h, lowest, 1.0, xtol=1e-14, rtol=1e-12)))


def solve_lever(model: ResponseModel, lever: str, *, distance: int, eps_target: float) -> FactorAnswer:
    """The factor ``lever`` (``joint`` or one component alone) needs to meet ``eps_target`` at
    ``distance`` on ``model`` (or, met today, the headroom); a component without its own sweep
    axis gets no answer ("not sampled", with the command that samples it)."""
    if lever != "joint" and not model.is_sampled(lever):
        return FactorAnswer(lever=lever, reachable=None, factor=None, suppression=math.nan, sampled=False,
                            note=not_sampled_note([lever]))
    ln_t = math.log(eps_target)
    found = find_boundary(lambda f: model.ln_eps(_scaled(lever, f), distance) - ln_t,
                          lowest=0.0 if lever != "joint" else 1e-12)
    f = found.factor
    if found.kind == "unbounded":
        # no finite answer to print (1 would read as "no headroom"): say so instead
        return FactorAnswer(lever=lever, reachable=True, factor=None, suppression=model.suppression(None),
                            note=f"goal already met today; {lever} may get more than "
                                 f"x{HEADROOM_LIMIT:g} worse (the goal barely depends on it)")
    if found.kind == "unreachable":
        lam = model.suppression(_scaled(lever, 0.0))
        why = (f"not reachable alone: with {lever} perfect, Lambda = {lam:.3g}" if lever != "joint"
               else "not reachable: the model never meets the goal at this distance")
        return FactorAnswer(lever=lever, reachable=False, factor=None, suppression=lam, note=why)
    note = f"goal already met today; headroom: {lever} may get x{f:.2f} worse" if found.kind == "headroom" else ""
    return FactorAnswer(lever=lever, reachable=True, factor=f, suppression=model.suppression(_scaled(lever, f)),
                        note=note, extrapolation=tuple(model.extrapolation(_scaled(lever, f))))


def required_suppression(model: ResponseModel, *, distance: int, eps_target: float) -> float | None:
    """Lambda needed at ``distance`` with today's prefactor A: (A / eps)^(2 / (d + 1)) (None when
    that is beyond any float, which no device reaches)."""
    ln_lam = (model.ln_prefactor(None) - math.log(eps_target)) * 2 / (distance + 1)
    return math.exp(ln_lam) if ln_lam < math.log(1e300) else None


def today_answer(model: ResponseModel, report: FitReport | None, *, distance: int, eps_target: float,
                 max_qubits: int, code: str = "surface", budget_name: str = "goal.max_qubits") -> TodayAnswer:
    """Today's device against the goal; ``max_qubits`` is the qubit budget in effect (named
    ``budget_name``: goal.max_qubits, or --qubits when the question gives one)."""
    lam = model.suppression(None)
    fitted = report.today().suppression if report is not None and report.today() else None
    above = lam <= 1
    d = smallest_distance(model, None, eps_target)
    eps_at = model.logical_error_per_cycle(None, distance)
    qubits = physical_qubits(d, code) if d else None
    if above:
        note = f"above threshold: Lambda = {lam:.3g} <= 1, a larger code does not help"
        if d is not None:
            note += f" (distance {d} already meets the goal)"
    elif d is None:
        note = f"goal not met by any distance up to {MAX_DISTANCE}"
    else:
        note = "" if qubits <= max_qubits else f"needs {qubits} qubits, more than {budget_name} = {max_qubits}"
    return TodayAnswer(suppression_model=lam, suppression_fitted=fitted, above_threshold=above, distance=d,
                       physical_qubits=qubits, within_max_qubits=bool(d and qubits <= max_qubits),
                       logical_error_per_cycle=_below(eps_at), note=note, max_qubits=max_qubits)


def distance_extrapolation_note(distance: int, sampled: Sequence[int]) -> str:
    """Say when an answer at ``distance`` rests on the (d+1)/2 ansatz beyond the sampled distances.

    >>> distance_extrapolation_note(21, (3, 5, 7))
    'd = 21 is beyond the largest sampled distance 7: eps there is extrapolated along the (d+1)/2 law by 7 more factors of Lambda'
    >>> distance_extrapolation_note(5, (3, 5, 7))
    ''
    """
    top = max(sampled, default=0)
    if not sampled or distance <= top:
        return ""
    steps = (distance - top) // 2
    return (f"d = {distance} is beyond the largest sampled distance {top}: eps there is extrapolated "
            f"along the (d+1)/2 law by {steps} more factor{'s' if steps != 1 else ''} of Lambda")


def requirements(model: ResponseModel, target: Target, *, eps_target: float | None = None,
                 distance: int | None = None, qubits: int | None = None,
                 report: FitReport | None = None) -> Requirements:
    """All answers for one goal (default: the target's goal) at one distance."""
    eps = float(eps_target if eps_target is not None else target.goal.logical_error_per_cycle)
    check_rate("eps_target" if eps_target is not None else "goal.logical_error_per_cycle", eps)
    d, source = choose_distance(target, distance=distance, qubits=qubits)
    joint = solve_lever(model, "joint", distance=d, eps_target=eps)
    comps = tuple(solve_lever(model, c, distance=d, eps_target=eps) for c in present_components(model))
    starts = tuple(_scaled(a.lever, a.factor) for a in (joint, *comps)
                   if a.reachable and a.factor is not None and a.factor < 1)
    mix = cheapest_mix(model, distance=d, eps_target=eps, costs={c: target.cost(c) for c in COMPONENTS},
                       starts=starts)
    notes = []
    if report is not None and (far := distance_extrapolation_note(d, report.sampled_distances)):
        notes.append(far)
    if model.unsampled:
        notes.append(not_sampled_note(model.unsampled) + " (the joint factor moves them together)")
    required = required_suppression(model, distance=d, eps_target=eps)
    if required is None:
        notes.append(f"Lambda needed at d = {d} is above 1e300: beyond any reachable")
    code = target.sweep.code
    budget = (qubits, "--qubits") if qubits is not None else (target.goal.max_qubits, "goal.max_qubits")
    today = today_answer(model, report, distance=d, eps_target=eps, max_qubits=budget[0], code=code,
                         budget_name=budget[1])
    if today.logical_error_per_cycle is None:
        notes.append(f"eps per cycle today at d = {d} is below {TINY:g}: beyond any reachable, not printed")
    return Requirements(eps_target=eps, distance=d, physical_qubits=physical_qubits(d, code),
                        distance_source=source, required_suppression=required, joint=joint, components=comps,
                        mix=mix, today=today, model_form=model.form, model_quality=model.quality.summary(),
                        notes=tuple(notes), code=code)
