"""What a scale factor means for the device, in the units a hardware team measures, and the
logical error per second.

A factor ``f`` on a component multiplies its probabilities as placed in the circuit (see
:mod:`planner.noise`). In physical terms:

- ``gate_1q`` / ``gate_2q``: the Pauli error per gate is ``f p``; the average gate infidelity
  that randomized benchmarking measures is ``r = p D / (D + 1)`` (Nielsen, Phys. Lett. A 303, 249
  (2002); the inverse of :func:`planner.noise.pauli_error_from_infidelity`);
- ``readout`` / ``reset``: the flip probability is ``f p``;
- ``idle`` / ``idle_measure``: the twirled T1/T2 channel over the layer (a two-qubit-gate layer
  for ``idle``, the measure+reset layer for ``idle_measure``) and the excess error are both
  multiplied by ``f``. Since p_x = p_y = d1/4 and p_z = d2/2 - d1/4 with d_i = 1 - exp(-t/T_i)
  (Tomita & Svore, PRA 90, 062320 (2014), eqs. 9-10), multiplying the channel by ``f`` is the
  same as ``d_i -> f d_i`` for both times: ``T_i' = -t / ln(1 - f d_i)`` at today's duration
  (exact, no approximation). For ``idle_measure`` the alternative is a shorter measure+reset
  layer at today's T1/T2: the duration ``t'`` whose twirled total error is ``f`` times today's
  (solved numerically; the excess part is then also ``f`` times today's).

The time figures: a cycle lasts the sum of a round's layer durations
(:func:`planner.circuits.timing.cycle_duration_ns`); a per-cycle rate ``eps`` is a per-second
rate ``-ln(1 - 2 eps) / (2 t_cycle)`` (independent flips compose as (1 - 2 eps)^n, common
practice, no source), about ``eps / t_cycle``; the mean time between logical errors is its
inverse.

>>> from planner.noise import NoiseModel
>>> m = NoiseModel(gate_1q=1e-3, gate_2q=5e-3, readout=1e-2, reset=2e-3, t1_us=80.0, t2_us=60.0,
...                gate_1q_ns=25, gate_2q_ns=40, measure_ns=500, reset_ns=100)
>>> v = physical_value(m, "gate_2q", 0.5)
>>> round(v.values["pauli_error"], 6), round(v.values["rb_infidelity"], 6)
(0.0025, 0.002)
>>> w = physical_value(m, "idle_measure", 0.5)
>>> round(w.values["t1_us"], 1), round(w.values["t2_us"], 1), round(w.values["layer_ns"], 1)
(160.3, 120.3, 299.3)
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from scipy.optimize import brentq

from planner.noise import NoiseModel, twirl_idle

__all__ = ["LogicalPace", "PhysicalAnswers", "PhysicalValue", "logical_pace", "physical_answers", "physical_value",
           "physical_values"]

_GATE_QUBITS = {"gate_1q": 1, "gate_2q": 2}


@dataclasses.dataclass(frozen=True, kw_only=True)
class PhysicalValue:
    """A component at a factor, in physical units: ``values`` (named numbers) and ``text`` (one
    line a person reads); ``text`` says so when the factor maps to no physical value."""

    component: str
    factor: float | None
    values: dict[str, float]
    text: str

    def to_json(self) -> dict[str, Any]:
        return {"component": self.component, "factor": self.factor, "values": dict(self.values),
                "text": self.text}


def _rb_infidelity(p: float, num_qubits: int) -> float:
    d = 2 ** num_qubits
    return p * d / (d + 1)


def _scaled_time(t_ns: float, time_us: float, f: float) -> float | None:
    """T' with 1 - exp(-t/T') = f (1 - exp(-t/T)); None when no finite time gives it."""
    if not math.isfinite(time_us):
        return math.inf
    decay = -math.expm1(-t_ns / 1000 / time_us)
    x = f * decay
    if x >= 1:
        return None
    if x <= 0:
        return math.inf
    return -t_ns / 1000 / math.log1p(-x)


def _layer(model: NoiseModel, component: str) -> tuple[float, float]:
    """The idle component's layer duration (ns) and today's excess probability."""
    if component == "idle":
        return model.gate_2q_ns, model.idle_excess
    return model.measure_ns + model.reset_ns, model.idle_measure_excess


def _gate_value(model: NoiseModel, component: str, f: float) -> PhysicalValue:
    p = model.probability(component) * f
    n = _GATE_QUBITS[component]
    name = "1q gate" if n == 1 else model.native_2q.upper()
    r = _rb_infidelity(p, n)
    return PhysicalValue(component=component, factor=f, values={"pauli_error": p, "rb_infidelity": r},
                         text=f"{name} Pauli error <= {p:.3g} (RB infidelity <= {r:.3g})")


def _idle_value(model: NoiseModel, component: str, f: float) -> PhysicalValue:
    t, excess = _layer(model, component)
    today = twirl_idle(duration_ns=t, t1_us=model.t1_us, t2_us=model.t2_us)
    t1, t2 = _scaled_time(t, model.t1_us, f), _scaled_time(t, model.t2_us, f)
    values: dict[str, float] = {"twirled_error": today.total * f, "excess": excess * f}
    where = "2q layer" if component == "idle" else "measure+reset"
    if t1 is None or t2 is None or today.total <= 0:
        text = f"no T1/T2 gives it over today's {t:g} ns {where}"
    else:
        values.update(t1_us=t1, t2_us=t2)
        text = f"T1 >= {_us(t1)}, T2 >= {_us(t2)} over today's {t:g} ns {where}"
    if excess > 0:
        text += f", excess <= {excess * f:.3g}"
    if component == "idle_measure" and today.total > 0 and 0 < f < 1:
        target = today.total * f

        def gap(x: float) -> float:
            return twirl_idle(duration_ns=x, t1_us=model.t1_us, t2_us=model.t2_us).total - target

        shorter = brentq(gap, 0.0, t, xtol=1e-9)
        values["layer_ns"] = shorter
        text += f"; or measure+reset <= {shorter:.4g} ns"
    return PhysicalValue(component=component, factor=f, values=values, text=text)


def _us(x: float) -> str:
    return "any" if math.isinf(x) else f"{x:.4g} us"


def physical_value(model: NoiseModel, component: str, factor: float | None) -> PhysicalValue:
    """``component`` at ``factor`` (None: no factor, e.g. not reachable) in physical units."""
    if factor is None or not math.isfinite(factor):
        return PhysicalValue(component=component, factor=None, values={}, text="no factor, no physical value")
    today = model.summary()[component]
    if today <= 0:
        return PhysicalValue(component=component, factor=factor, values={},
                             text="no physical value: the component is at zero today, so a factor changes nothing")
    if component in _GATE_QUBITS:
        return _gate_value(model, component, factor)
    if component in ("readout", "reset"):
        p = model.probability(component) * factor
        what = "readout flip" if component == "readout" else "reset error"
        return PhysicalValue(component=component, factor=factor, values={"flip_probability": p},
                             text=f"{what} <= {p:.3g}")
    return _idle_value(model, component, factor)


def physical_values(model: NoiseModel, factors: dict[str, float | None]) -> dict[str, PhysicalValue]:
    """:func:`physical_value` of every component in ``factors``."""
    return {c: physical_value(model, c, f) for c, f in factors.items()}


@dataclasses.dataclass(frozen=True, kw_only=True)
class LogicalPace:
    """A per-cycle logical error rate in time: errors per second and the mean time between them."""

    cycle_ns: float
    per_cycle: float
    per_second: float
    mean_seconds_between: float

    def to_json(self) -> dict[str, float | None]:
        fin = lambda x: x if math.isfinite(x) else None  # noqa: E731
        return {"cycle_ns": self.cycle_ns, "logical_error_per_cycle": self.per_cycle,
                "logical_errors_per_second": fin(self.per_second),
                "mean_seconds_between_logical_errors": fin(self.mean_seconds_between)}


def logical_pace(eps: float, cycle_ns: float) -> LogicalPace:
    """Errors per second and mean time between logical errors for ``eps`` per cycle.

    >>> p = logical_pace(1e-6, 1000.0)
    >>> round(p.per_second, 3), round(p.mean_seconds_between, 3)
    (1.0, 1.0)
    >>> logical_pace(0.6, 1000.0).mean_seconds_between > 0  # beyond 1/2: finite, never an error
    True
    """
    if not (cycle_ns > 0 and math.isfinite(cycle_ns)):
        raise ValueError(f"cycle duration must be positive and finite, got {cycle_ns}")
    # at eps -> 1/2 every cycle randomises the logical qubit: the rate is capped there (finite)
    rate = -math.log1p(-2 * min(eps, 0.5 * (1 - 1e-12))) / 2 / (cycle_ns * 1e-9)
    return LogicalPace(cycle_ns=cycle_ns, per_cycle=eps, per_second=rate,
                       mean_seconds_between=1 / rate if rate > 0 else math.inf)


# ---------------------------------------------------------------------------------------------
# the answers in physical units and in time


@dataclasses.dataclass(frozen=True, kw_only=True)
class PhysicalAnswers:
    """The requirement answers for a device in physical units and in time.

    ``rows``: (lever, component, factor, value): the joint factor applied to every component,
    each component alone, the cheapest mix. ``cycle_ns``: one cycle's duration (None when the
    target gives no durations, e.g. a preset). ``today``/``goal``: the logical error rate in time
    at the answer's distance today and at the goal; ``today_seconds_interval``: the mean time
    between logical errors today, from the eps interval; ``roadmap``: (date, eps at the goal
    distance, mean seconds between logical errors) per roadmap step.
    """

    rows: tuple[tuple[str, str, float | None, PhysicalValue], ...]
    cycle_ns: float | None
    distance: int
    today: LogicalPace | None = None
    today_seconds_interval: tuple[float, float] | None = None
    goal: LogicalPace | None = None
    roadmap: tuple[tuple[str, float, float], ...] = ()

    def to_json(self) -> dict[str, Any]:
        fin = lambda x: x if x is not None and math.isfinite(x) else None  # noqa: E731
        return {"values": [{"lever": lv, **v.to_json()} for lv, _, _, v in self.rows],
                "cycle_ns": self.cycle_ns, "distance": self.distance,
                "today": self.today.to_json() if self.today else None,
                "today_mean_seconds_between_interval": None if self.today_seconds_interval is None else
                {"low": fin(self.today_seconds_interval[0]), "high": fin(self.today_seconds_interval[1])},
                "goal": self.goal.to_json() if self.goal else None,
                "roadmap": [{"date": d, "logical_error_per_cycle": e, "mean_seconds_between_logical_errors": fin(s)}
                            for d, e, s in self.roadmap]}


def _lever_rows(model: NoiseModel, req: Any) -> list[tuple[str, str, float | None, PhysicalValue]]:
    from planner.config import COMPONENTS

    present = [c for c in COMPONENTS if c in model.summary()]
    rows = []
    if req.joint.reachable and req.joint.factor is not None:
        rows += [("joint", c, req.joint.factor, physical_value(model, c, req.joint.factor)) for c in present]
    for a in req.components:
        if a.lever in present and a.sampled and a.reachable and a.factor is not None:
            rows.append((f"{a.lever} alone", a.lever, a.factor, physical_value(model, a.lever, a.factor)))
    return rows + _mix_rows(model, req.mix, present)


def _mix_rows(model: NoiseModel, mix: Any, present: list[str]) -> list[tuple[str, str, float | None, PhysicalValue]]:
    """The components the cheapest mix changes, in physical units."""
    if not mix.reachable:
        return []
    changed = [c for c in present if c in mix.scales and c not in mix.not_sampled and mix.scales[c] < 1]
    return [("cheapest mix", c, mix.scales[c], physical_value(model, c, mix.scales[c])) for c in changed]


def physical_answers(target: Any, req: Any, roadmap: Any = None) -> PhysicalAnswers | None:
    """The answers ``req`` (and the ``roadmap``) for ``target`` in physical units and in time;
    None for a target planner cannot build a noise model of."""
    from planner.circuits.timing import cycle_duration_ns

    model = NoiseModel.from_target(target)
    rows = tuple(_lever_rows(model, req))
    cycle = cycle_duration_ns(model, code=target.sweep.code) if model.measure_ns + model.gate_2q_ns > 0 else 0.0
    if cycle <= 0:
        return PhysicalAnswers(rows=rows, cycle_ns=None, distance=req.distance)
    eps = req.today.logical_error_per_cycle
    iv = req.today.logical_error_per_cycle_interval
    today = logical_pace(eps, cycle) if eps else None
    span = None
    if today is not None and iv is not None and iv.low > 0:
        span = (logical_pace(iv.high, cycle).mean_seconds_between, logical_pace(iv.low, cycle).mean_seconds_between)
    steps: list[tuple[str, float, float]] = []
    if roadmap is not None:
        d = roadmap.goal_distance
        steps = [(str(s.date), s.eps[d], logical_pace(s.eps[d], cycle).mean_seconds_between)
                 for s in roadmap.steps if d in s.eps and s.eps[d] > 0]
    return PhysicalAnswers(rows=rows, cycle_ns=cycle, distance=req.distance, today=today, today_seconds_interval=span,
                           goal=logical_pace(req.eps_target, cycle), roadmap=tuple(steps))
