"""Dates: when the goal is met at the improvement rates the team expects.

A rate ``per_year = f`` removes the fraction f of a component's error each year:
``s(t) = (1 - f)^t``; ``halving_years = h`` halves it every h years: ``s(t) = 2^(-t/h)``
(t in years from ``roadmap.start``). Components without a rate stay at today's error. The goal
is met at t when some odd distance within ``goal.max_qubits`` has eps_d(s(t)) <= goal. With a
spread on the rates (1 sigma), rates are sampled (normal, clipped to the allowed range) and the
dates come with a :data:`~planner.fits.CONFIDENCE` range; bootstrap models, when given, are
paired with the samples so the range also covers the fit's uncertainty. The table's rows (central
rates) get their Lambda and eps intervals from the bootstrap models alone.

>>> round(scale_at(per_year=0.2, halving_years=None, years=2.0), 4), scale_at(per_year=None, halving_years=2.0, years=4.0)
(0.64, 0.25)
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from planner.config import COMPONENTS, Rate, Target
from planner.fits import CONFIDENCE, Interval
from planner.planning.ask import goal_distance, smallest_distance
from planner.planning.model import ResponseModel, not_sampled_note, physical_qubits
from planner.planning.uncertainty import replica_interval

STEPS_PER_YEAR = {"quarter": 4, "year": 1}
#: time resolution of the date search (steps per year) before interpolation
SEARCH_PER_YEAR = 24


def scale_at(*, per_year: float | None, halving_years: float | None, years: float | np.ndarray) -> Any:
    """Scale factor after ``years`` at a rate (exactly one of per_year / halving_years, or neither)."""
    if per_year is not None:
        return (1 - per_year) ** np.asarray(years) if isinstance(years, np.ndarray) else (1 - per_year) ** years
    if halving_years is not None:
        return 2.0 ** (-np.asarray(years) / halving_years) if isinstance(years, np.ndarray) \
            else 2.0 ** (-years / halving_years)
    return np.ones_like(years) if isinstance(years, np.ndarray) else 1.0


@dataclasses.dataclass(frozen=True)
class Coherence:
    """What a T1/T2 growth acts on: today's times and, per idle component, its layer duration and
    excess (non-T1/T2) error. The idle component's factor after ``years`` is
    (twirl(T1 g, T2 g) + excess) / (twirl(T1, T2) + excess) with g = (1 + growth)^years, the twirl
    taken over the layer (the two-qubit gate layer for ``idle``, the measure+reset layer for
    ``idle_measure``).

    >>> c = Coherence(t1_us=50.0, t2_us=40.0, layers={"idle_measure": (700.0, 0.0)})
    >>> round(float(c.factor("idle_measure", growth=1.0, years=np.array([1.0]))[0]), 3)  # T1, T2 doubled
    0.502
    """

    t1_us: float
    t2_us: float
    layers: Mapping[str, tuple[float, float]]  # component -> (duration_ns, excess probability)

    @classmethod
    def from_target(cls, target: Target) -> Coherence | None:
        from planner.noise import NoiseModel

        m = NoiseModel.from_target(target)
        if not (math.isfinite(m.t1_us) and math.isfinite(m.t2_us)):
            return None
        return cls(m.t1_us, m.t2_us, {"idle": (m.gate_2q_ns, m.idle_excess),
                                      "idle_measure": (m.measure_ns + m.reset_ns, m.idle_measure_excess)})

    def factor(self, component: str, *, growth: float, years: np.ndarray) -> np.ndarray:
        from planner.noise import twirl_idle

        duration, excess = self.layers[component]
        today = twirl_idle(duration_ns=duration, t1_us=self.t1_us, t2_us=self.t2_us).total + excess
        if today <= 0 or growth == 0:
            return np.ones_like(years, dtype=float)
        g = (1 + growth) ** np.asarray(years, dtype=float)
        later = np.array([twirl_idle(duration_ns=duration, t1_us=self.t1_us * x, t2_us=self.t2_us * x).total
                          for x in np.ravel(g)]).reshape(np.shape(g))
        return (later + excess) / today


@dataclasses.dataclass(frozen=True)
class RateSet:
    """Central rates per component: ``per_year`` or ``halving_years`` (None = no improvement),
    and an optional T1/T2 growth per year acting on the idle components (see :class:`Coherence`)."""

    per_year: dict[str, float | None]
    halving_years: dict[str, float | None]
    coherence_growth: float = 0.0
    coherence: Coherence | None = None

    @classmethod
    def from_rates(cls, rates: Mapping[str, Rate], *, target: Target | None = None) -> RateSet:
        growth = target.roadmap.coherence_growth_per_year if target is not None and target.roadmap else 0.0
        return cls({c: (rates[c].per_year if c in rates else None) for c in COMPONENTS},
                   {c: (rates[c].halving_years if c in rates else None) for c in COMPONENTS},
                   growth, Coherence.from_target(target) if growth and target is not None else None)

    def scales(self, years: np.ndarray) -> np.ndarray:
        """Scale factors, shape (len(years), 6)."""
        cols = []
        for c in COMPONENTS:
            s = scale_at(per_year=self.per_year[c], halving_years=self.halving_years[c], years=years)
            if self.coherence is not None and c in self.coherence.layers:
                s = s * self.coherence.factor(c, growth=self.coherence_growth, years=years)
            cols.append(s)
        return np.stack(cols, axis=1)

    def faster(self, component: str, points: float) -> RateSet:
        """The same rates with ``component`` removing ``points`` more of its error per year."""
        f = self.per_year[component]
        h = self.halving_years[component]
        base = f if f is not None else (1 - 2 ** (-1 / h) if h is not None else 0.0)
        per = dict(self.per_year)
        hal = dict(self.halving_years)
        per[component], hal[component] = min(base + points, 0.999), None
        return dataclasses.replace(self, per_year=per, halving_years=hal)

    def sample(self, rates: Mapping[str, Rate], rng: np.random.Generator, *,
               coherence_spread: float = 0.0) -> RateSet:
        per, hal = dict(self.per_year), dict(self.halving_years)
        growth = self.coherence_growth
        if coherence_spread > 0 and self.coherence is not None:
            growth = float(max(rng.normal(growth, coherence_spread), 0.0))
        for c, r in rates.items():
            if r.spread <= 0:
                continue
            if r.per_year is not None:
                per[c] = float(np.clip(rng.normal(r.per_year, r.spread), 0.0, 0.999))
            else:
                hal[c] = float(max(rng.normal(r.halving_years, r.spread), 0.05))
        return dataclasses.replace(self, per_year=per, halving_years=hal, coherence_growth=growth)


def add_months(start: dt.date, months: int) -> dt.date:
    """``start`` moved by whole calendar months, the day clamped to the month's length.

    >>> add_months(dt.date(2027, 1, 1), 3), add_months(dt.date(2027, 1, 31), 1), add_months(dt.date(2027, 1, 1), 12)
    (datetime.date(2027, 4, 1), datetime.date(2027, 2, 28), datetime.date(2028, 1, 1))
    """
    y, m = divmod(start.month - 1 + months, 12)
    year, month = start.year + y, m + 1
    if month == 12:
        days_in_month = 31
    else:
        days_in_month = (dt.date(year, month + 1, 1) - dt.date(year, month, 1)).days
    return dt.date(year, month, min(start.day, days_in_month))


def years_to_date(start: dt.date, years: float) -> dt.date:
    """The calendar date ``years`` after ``start``: whole months on the calendar (so quarterly
    and yearly steps from 2027-01-01 land on 2027-04-01, 2028-01-01, ... and never drift), the
    fraction of a month as days of that month.

    >>> years_to_date(dt.date(2027, 1, 1), 0.25), years_to_date(dt.date(2027, 1, 1), 0.5), years_to_date(dt.date(2027, 1, 1), 3.0)
    (datetime.date(2027, 4, 1), datetime.date(2027, 7, 1), datetime.date(2030, 1, 1))
    >>> years_to_date(dt.date(2027, 1, 1), 1 / 24)  # half of January
    datetime.date(2027, 1, 17)
    """
    months = years * 12
    whole = math.floor(months + 1e-9)  # 0.25 * 12 is 3 up to rounding
    frac = max(months - whole, 0.0)
    d0 = add_months(start, whole)
    if frac < 1e-9:
        return d0
    d1 = add_months(start, whole + 1)
    return d0 + dt.timedelta(days=round(frac * (d1 - d0).days))


def first_crossing(years: np.ndarray, values: np.ndarray) -> float | None:
    """First t where ``values`` (sampled at ``years``) drops to <= 0, linearly interpolated."""
    idx = np.flatnonzero(values <= 0)
    if idx.size == 0:
        return None
    i = int(idx[0])
    if i == 0:
        return float(years[0])
    y0, y1 = values[i - 1], values[i]
    return float(years[i - 1] + (years[i] - years[i - 1]) * y0 / (y0 - y1))


def goal_years(model: ResponseModel, rates: RateSet, *, eps_target: float, max_distance: int,
               horizon_years: float) -> float | None:
    """Years until some odd d <= max_distance meets eps_target (None beyond the horizon)."""
    t = np.linspace(0, horizon_years, int(horizon_years * SEARCH_PER_YEAR) + 1)
    s = rates.scales(t)
    # ln eps is linear in (d+1)/2, so the best distance is one of the two ends
    best = np.minimum(model.ln_eps_array(s, 3), model.ln_eps_array(s, max_distance))
    return first_crossing(t, best - math.log(eps_target))


def milestone_years(model: ResponseModel, rates: RateSet, *, milestone: float, horizon_years: float) -> float | None:
    t = np.linspace(0, horizon_years, int(horizon_years * SEARCH_PER_YEAR) + 1)
    return first_crossing(t, milestone - model.suppression_array(rates.scales(t)))


@dataclasses.dataclass(frozen=True, kw_only=True)
class RoadmapStep:
    date: dt.date
    years: float
    scales: dict[str, float]
    suppression: float
    eps: dict[int, float]  # per candidate distance
    distance: int | None  # smallest meeting the goal within max_qubits
    physical_qubits: int | None
    #: bootstrap intervals (None / empty without replica models)
    suppression_interval: Interval | None = None
    eps_intervals: dict[int, Interval] = dataclasses.field(default_factory=dict)
    #: notes for scales outside the sampled range (the model is extrapolated there)
    extrapolation: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return {"date": self.date.isoformat(), "years": self.years, "scales": dict(self.scales),
                "suppression_factor": self.suppression if math.isfinite(self.suppression) else None,
                "logical_error_per_cycle": {str(d): e for d, e in self.eps.items()},
                "distance": self.distance, "physical_qubits": self.physical_qubits,
                "suppression_factor_interval": self.suppression_interval.to_json()
                if self.suppression_interval else None,
                "logical_error_per_cycle_intervals": {str(d): v.to_json() for d, v in self.eps_intervals.items()},
                "extrapolation": list(self.extrapolation)}


@dataclasses.dataclass(frozen=True, kw_only=True)
class DatedEvent:
    """When something happens: a central date and, with spreads, a range (None = beyond horizon)."""

    what: str
    date: dt.date | None
    low: dt.date | None
    high: dt.date | None
    fraction_reached: float  # of sampled scenarios reaching it within the horizon

    def to_json(self) -> dict[str, Any]:
        iso = lambda d: d.isoformat() if d else None  # noqa: E731
        return {"what": self.what, "date": iso(self.date), "low": iso(self.low), "high": iso(self.high),
                "fraction_of_scenarios_reached": self.fraction_reached}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Roadmap:
    """Lambda, eps per cycle and the smallest distance meeting the goal at each calendar step,
    with the dates of the goal and of each Lambda milestone, at the target's improvement rates."""

    start: dt.date
    step: str
    eps_target: float
    max_qubits: int
    candidate_distances: tuple[int, ...]
    steps: tuple[RoadmapStep, ...]
    goal: DatedEvent
    milestones: tuple[DatedEvent, ...]
    num_scenarios: int
    note: str = ""
    #: the largest odd distance within max_qubits (the distance the goal is judged at)
    goal_distance: int = 3
    #: replica models behind the rows' intervals (0: none)
    num_replicas: int = 0

    def to_json(self) -> dict[str, Any]:
        return {"start": self.start.isoformat(), "step": self.step, "confidence": CONFIDENCE,
                "goal_distance": self.goal_distance, "num_replicas": self.num_replicas,
                "target_logical_error_per_cycle": self.eps_target, "max_qubits": self.max_qubits,
                "candidate_distances": list(self.candidate_distances),
                "steps": [s.to_json() for s in self.steps], "goal": self.goal.to_json(),
                "milestones": [m.to_json() for m in self.milestones],
                "num_scenarios": self.num_scenarios, "note": self.note}


def _candidates(max_d: int) -> tuple[int, ...]:
    ds = list(range(3, max_d + 1, 2))
    if len(ds) <= 5:
        return tuple(ds)
    pick = {ds[round(i * (len(ds) - 1) / 4)] for i in range(5)}
    return tuple(sorted(pick))


def _event(what: str, start: dt.date, central: float | None, sampled: Sequence[float | None]) -> DatedEvent:
    reached = [x for x in sampled if x is not None]
    frac = len(reached) / len(sampled) if sampled else (1.0 if central is not None else 0.0)
    low = high = None
    if sampled and reached:
        q = (1 - CONFIDENCE) / 2
        # unreached scenarios count as +inf: the high end is beyond the horizon if too many
        arr = np.array([x if x is not None else np.inf for x in sampled])
        lo_y, hi_y = np.quantile(arr, [q, 1 - q], method="inverted_cdf")  # no interpolation across inf
        low = years_to_date(start, float(lo_y)) if np.isfinite(lo_y) else None
        high = years_to_date(start, float(hi_y)) if np.isfinite(hi_y) else None
    return DatedEvent(what=what, date=years_to_date(start, central) if central is not None else None, low=low,
                      high=high, fraction_reached=frac)


def _steps(target: Target, model: ResponseModel, central: RateSet, *, eps: float, dmax: int,
           cands: Sequence[int]) -> list[RoadmapStep]:
    """The central roadmap, step by step, up to the first step that meets the goal."""
    rm = target.roadmap
    per = STEPS_PER_YEAR[rm.step]
    steps = []
    for i in range(int(rm.horizon_years * per) + 1):
        t = i / per
        s = dict(zip(COMPONENTS, central.scales(np.array([t]))[0].tolist()))
        d = smallest_distance(model, s, eps)
        d = d if d is not None and d <= dmax else None
        steps.append(RoadmapStep(date=years_to_date(rm.start, t), years=t, scales=s,
                                 suppression=model.suppression(s),
                                 eps={c: model.logical_error_per_cycle(s, c) for c in cands}, distance=d,
                                 physical_qubits=physical_qubits(d, target.sweep.code) if d else None,
                                 extrapolation=tuple(model.extrapolation(s))))
        if d is not None:
            break
    return steps


def _scenarios(target: Target, model: ResponseModel, central: RateSet, models: Sequence[ResponseModel], *,
               seed: int, num_scenarios: int) -> list[tuple[RateSet, ResponseModel]]:
    """Sampled (rates, model) pairs: the rates drawn from their spreads, the models taken in turn
    from the bootstrap replicas (none when nothing is uncertain)."""
    rm = target.roadmap
    rng = np.random.default_rng(seed)
    spread = any(r.spread > 0 for r in rm.rates.values())
    n = num_scenarios if (spread or models) else 0
    return [(central.sample(rm.rates, rng, coherence_spread=rm.coherence_growth_spread),
             models[i % len(models)] if models else model) for i in range(n)]


def build_roadmap(target: Target, model: ResponseModel, *, seed: int = 0, num_scenarios: int = 200,
                  models: Sequence[ResponseModel] = (), eps_target: float | None = None) -> Roadmap | None:
    """The roadmap of ``target`` (None when it has no roadmap section)."""
    rm = target.roadmap
    if rm is None:
        return None
    eps = float(eps_target if eps_target is not None else target.goal.logical_error_per_cycle)
    dmax = goal_distance(target)
    central = RateSet.from_rates(rm.rates, target=target)
    cands = _candidates(dmax)
    t_goal = goal_years(model, central, eps_target=eps, max_distance=dmax, horizon_years=rm.horizon_years)
    steps = _with_intervals(_steps(target, model, central, eps=eps, dmax=dmax, cands=cands), models, cands)
    scen = _scenarios(target, model, central, models, seed=seed, num_scenarios=num_scenarios)
    goal = _event("goal", rm.start, t_goal,
                  [goal_years(m, r, eps_target=eps, max_distance=dmax, horizon_years=rm.horizon_years)
                   for r, m in scen])
    miles = tuple(_event(f"Lambda >= {ms:g}", rm.start,
                         milestone_years(model, central, milestone=ms, horizon_years=rm.horizon_years),
                         [milestone_years(m, r, milestone=ms, horizon_years=rm.horizon_years) for r, m in scen])
                  for ms in rm.milestones)
    note = "" if t_goal is not None else \
        f"goal not met within {rm.horizon_years:g} years and {target.goal.max_qubits} qubits at these rates"
    if not rm.rates and not rm.coherence_growth_per_year:
        note = (note + "; " if note else "") + "no rates given: nothing improves"
    if any(len({st.scales[c] for c in model.unsampled}) > 1 for st in steps):
        # their weight is known only together: apart, the model's even split decides the dates
        note = (note + "; " if note else "") + "rates move components without their own sweep axis apart, " \
            "so these dates rest on an even split of their weight (" + not_sampled_note(model.unsampled) + ")"
    return Roadmap(start=rm.start, step=rm.step, eps_target=eps, max_qubits=target.goal.max_qubits,
                   candidate_distances=cands, steps=tuple(steps), goal=goal, milestones=miles,
                   num_scenarios=len(scen), note=note, goal_distance=dmax, num_replicas=len(models))


def _with_intervals(steps: list[RoadmapStep], models: Sequence[ResponseModel],
                    cands: Sequence[int]) -> list[RoadmapStep]:
    """The steps with Lambda and eps intervals over the replica models (vectorised per model)."""
    if not models or not steps:
        return steps
    s = np.array([[st.scales[c] for c in COMPONENTS] for st in steps])
    lam = np.array([m.suppression_array(s) for m in models])  # (replicas, steps)
    eps = {d: np.minimum(np.exp(np.array([m.ln_eps_array(s, d) for m in models])), 0.5) for d in cands}
    out = []
    for i, st in enumerate(steps):
        out.append(dataclasses.replace(
            st, suppression_interval=replica_interval(st.suppression, _finite_or_inf(lam[:, i])),
            eps_intervals={d: iv for d in cands
                           if (iv := replica_interval(st.eps[d], eps[d][:, i].tolist())) is not None}))
    return out


def _finite_or_inf(x: np.ndarray) -> list[float]:
    # 1/0 from a perfect replica comes out as +inf (or nan from 0 * inf): treat both as +inf
    return [float(v) if not np.isnan(v) else math.inf for v in x]
