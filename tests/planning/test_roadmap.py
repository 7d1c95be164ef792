"""Roadmap dates, sensitivity and the bootstrap intervals."""

from __future__ import annotations

import datetime as dt
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.planning import answer_all, build_roadmap, sensitivity
from planner.planning.roadmap import RateSet, goal_years
from tests.helpers.synthetic import synthetic_stats
from planner.planning.model import FitQuality, ResponseModel

W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}


def make_model(weights, *, ln_a=math.log(0.1)):
    """A linear model with known weights and prefactor 0.1 (values invented for the tests)."""
    return ResponseModel("linear", {c: weights.get(c, 0.0) for c in COMPONENTS}, {c: 0.0 for c in COMPONENTS},
                         {c: 0.0 for c in COMPONENTS}, ln_a, {c: 0.5 for c in COMPONENTS},
                         {c: 1.0 for c in COMPONENTS}, (), FitQuality(None, 0.0, None, None, 0, ""))

ROADMAP = """
[roadmap]
start = 2030-01-01
horizon_years = 12
step = "year"
milestones = [2.0, 4.0]
[roadmap.rates]
gate_2q = {per_year = 0.2}
readout = {halving_years = 3.0}
"""


def target_with(extra: str = ROADMAP):
    return parse_target(EXAMPLE_TOML + extra)


def test_goal_date_matches_closed_form():
    # 1/Lambda(t) = 0.2 * 0.8^t + 0.27 (others fixed); goal at d = 21 (max_qubits 1000):
    # 0.1 * (1/Lambda)^11 = 1e-6 -> 1/Lambda = 1e-5^(1/11) (hand arithmetic of the ansatz)
    m = make_model({"gate_2q": 0.2, "readout": 0.0, "idle": 0.1, "gate_1q": 0.17})
    rm = build_roadmap(target_with(), m)
    need = 1e-5 ** (1 / 11)
    t_exact = math.log((need - 0.27) / 0.2) / math.log(0.8)
    got = (rm.goal.date - dt.date(2030, 1, 1)).days / 365.25
    assert got == pytest.approx(t_exact, abs=0.02)
    # the yearly table stops at the first year meeting the goal
    assert rm.steps[-1].distance is not None and all(s.distance is None for s in rm.steps[:-1])
    assert rm.steps[-1].years == math.ceil(t_exact)
    assert rm.num_scenarios == 0  # no spreads, no bootstrap models: no range


def test_milestone_already_passed_today_is_dated_start():
    m = make_model({"gate_2q": 0.2, "readout": 0.1})  # Lambda 3.3 today
    rm = build_roadmap(target_with(), m)
    assert rm.milestones[0].date == dt.date(2030, 1, 1)
    # Lambda >= 4: 0.2 * 0.8^t + 0.1 * 2^(-t/3) <= 0.25 (solved numerically, monotone)
    t4 = (rm.milestones[1].date - dt.date(2030, 1, 1)).days / 365.25
    assert 0.2 * 0.8**t4 + 0.1 * 2 ** (-t4 / 3) == pytest.approx(0.25, abs=2e-3)


def test_goal_not_met_within_horizon():
    m = make_model({"gate_2q": 0.2, "idle": 0.5})  # idle never improves: 1/Lambda >= 0.5
    rm = build_roadmap(target_with(), m)
    assert rm.goal.date is None and "not met" in rm.note


def test_no_roadmap_section_gives_none():
    assert build_roadmap(parse_target(EXAMPLE_TOML), make_model(W)) is None


def test_spread_gives_a_range_around_the_central_date():
    extra = ROADMAP.replace("gate_2q = {per_year = 0.2}", "gate_2q = {per_year = 0.2, spread = 0.05}")
    m = make_model({"gate_2q": 0.3, "readout": 0.1, "idle": 0.1})
    rm = build_roadmap(target_with(extra), m, seed=4)
    g = rm.goal
    assert rm.num_scenarios == 200 and g.low is not None and g.high is not None
    assert g.low < g.date < g.high


@settings(max_examples=25, deadline=None)
@given(st.floats(0.01, 0.6), st.floats(0.0, 0.3), st.sampled_from(COMPONENTS))
def test_faster_rates_never_give_a_later_date(f, extra, comp):
    m = make_model(W)
    base = RateSet({c: f for c in COMPONENTS}, {c: None for c in COMPONENTS})
    t0 = goal_years(m, base, eps_target=1e-6, max_distance=21, horizon_years=20)
    t1 = goal_years(m, base.faster(comp, extra), eps_target=1e-6, max_distance=21, horizon_years=20)
    if t0 is not None:
        assert t1 is not None and t1 <= t0 + 1e-9


def test_sensitivity_shares_sum_to_one_and_sort():
    m = make_model(W)
    s = sensitivity(m, target_with())
    assert sum(r.share for r in s.rows) == pytest.approx(1.0)
    assert s.rows[0].component == "gate_2q"  # largest weight (synthetic truth)
    assert [r.share for r in s.rows] == sorted((r.share for r in s.rows), reverse=True)
    g2 = s.rows[0]
    # linear form at s=1: elasticity = -share; halved: 1/(0.47 - 0.1); perfect: 1/0.27 (hand arithmetic)
    assert g2.elasticity == pytest.approx(-0.2 / 0.47)
    assert g2.suppression_halved == pytest.approx(1 / 0.37)
    assert g2.suppression_perfect == pytest.approx(1 / 0.27)
    assert g2.months_earlier is not None and g2.months_earlier > 0


@settings(max_examples=20, deadline=None)
@given(st.sampled_from(COMPONENTS), st.floats(0.05, 0.5))
def test_a_perfect_component_has_zero_share(comp, rest):
    m = make_model({c: (0.0 if c == comp else rest / 5) for c in COMPONENTS})
    row = next(r for r in sensitivity(m, target_with()).rows if r.component == comp)
    assert row.share == 0.0 and row.elasticity == 0.0
    assert row.suppression_perfect == pytest.approx(m.suppression(None))


def test_answer_all_bootstrap_intervals():
    # demo-sized grid (15 points x 3 d x 2 bases), 200 replicas; its speed goal is in
    # bench/roadmap_speed.py, not here
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5, 7), joint_scales=(0.5, 0.7, 1.0),
                            component_scales=(0.3, 0.6), shots=100_000, seed=2)
    extra = ROADMAP.replace("gate_2q = {per_year = 0.2}", "gate_2q = {per_year = 0.2, spread = 0.05}")
    a = answer_all(target_with(extra), stats, seed=1)
    req = a.requirements
    iv = req.joint.factor_interval
    true = (1e-5 ** (1 / 11)) / 0.47  # synthetic truth at d = 21, prefactor 0.1
    assert iv.low <= true <= iv.high and iv.low < iv.best < iv.high
    lam = a.uncertainty.intervals["lambda_today"]
    assert lam.low <= 1 / 0.47 <= lam.high
    assert a.roadmap.goal.low <= a.roadmap.goal.date <= a.roadmap.goal.high
    # seeded: the same call gives the same intervals
    b = answer_all(target_with(extra), stats, seed=1)
    assert b.uncertainty.intervals == a.uncertainty.intervals
    # serialised as fits.json is written: strict JSON (no NaN/Infinity), answers present
    import json

    from planner.reports.files import fits_document

    doc = json.loads(json.dumps(fits_document(a), allow_nan=False))
    assert doc["uncertainty"]["intervals"]["lambda_today"]["low"] == pytest.approx(lam.low)


def test_coherence_growth_lowers_the_idle_errors_and_brings_the_goal_forward():
    m = make_model(W)
    growth = ROADMAP.replace('step = "year"', 'step = "year"\ncoherence_growth_per_year = 0.3')
    base, faster = build_roadmap(target_with(), m), build_roadmap(target_with(growth), m)
    assert faster.goal.date < base.goal.date
    one_year = next(s for s in faster.steps if s.years == 1)
    # the example device has no idle excess, so its idle errors are pure T1/T2 twirl: after a year
    # of +30% the twirled error is ~1/1.3 of today's (exp(-t/T) ~ 1 - t/T over short layers;
    # common practice, no source)
    for comp in ("idle", "idle_measure"):
        assert one_year.scales[comp] == pytest.approx(1 / 1.3, rel=0.02)
    assert one_year.scales["gate_1q"] == 1.0  # other components only follow their own rates
