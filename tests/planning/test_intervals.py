"""Intervals on every planning figure (bootstrap replicas) and terminal tables at 80 columns."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from rich.console import Console

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.fits import CONFIDENCE
from planner.planning import answer_all
from planner.planning.sensitivity import FIGURES
from tests.helpers.synthetic import synthetic_stats
from planner.reports import tables

# synthetic truth (invented numbers): 1/Lambda = sum_c w_c s_c, prefactor 0.1
W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
ROADMAP = """
[roadmap]
start = 2030-01-01
horizon_years = 12
step = "quarter"
milestones = [2.0, 4.0]
[roadmap.rates]
gate_2q = {per_year = 0.2, spread = 0.05}
readout = {halving_years = 3.0}
[costs]
gate_2q = 3.0
"""
TARGET = parse_target(EXAMPLE_TOML + ROADMAP)
Q = (1 - CONFIDENCE) / 2


@pytest.fixture(scope="module")
def answers():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5, 7), joint_scales=(0.5, 0.7, 1.0),
                            component_scales=(0.3, 0.6), shots=100_000, seed=3)
    return answer_all(TARGET, stats, seed=5)


def brackets(i, *, strict: bool = True) -> bool:
    return i is not None and i.low <= i.best <= i.high and (i.low < i.high or not strict)


def replica_quantiles(values):
    return tuple(np.quantile(np.array(values, float), [Q, 1 - Q]))


def test_mix_intervals_bracket_and_come_from_replicas(answers):
    mix = answers.requirements.mix
    assert mix.reachable and mix.changed()
    for c in mix.changed():
        assert brackets(mix.scale_intervals[c]) and brackets(mix.cost_share_intervals[c]), c
    assert brackets(mix.cost_interval) and brackets(mix.suppression_interval)
    assert sum(mix.cost_shares.values()) == pytest.approx(1.0)
    # the mix lands on the goal, so the Lambda it reaches sits near the Lambda the goal needs
    req = answers.requirements
    assert mix.suppression_interval.low < req.required_suppression_interval.high * 1.1


def test_lever_and_today_intervals(answers):
    req = answers.requirements
    assert brackets(req.joint.suppression_interval) and brackets(req.required_suppression_interval)
    td = req.today
    assert brackets(td.suppression_model_interval) and brackets(td.logical_error_per_cycle_interval)
    lam = [m.suppression(None) for m in answers.uncertainty.models]
    lo, hi = replica_quantiles(lam)
    # the sampling part is the replica range; the printed interval adds the model part around it
    sampling = answers.uncertainty.sampling_intervals["lambda_today"]
    assert sampling.low == pytest.approx(min(lo, td.suppression_model))
    assert sampling.high == pytest.approx(max(hi, td.suppression_model))
    assert td.suppression_model_interval.low <= sampling.low and sampling.high <= td.suppression_model_interval.high
    # synthetic truth 1/0.47 lies in the 95% interval (seeded draw; invented numbers)
    assert td.suppression_model_interval.low <= 1 / 0.47 <= td.suppression_model_interval.high
    for a in req.components:
        assert a.suppression_interval is not None and brackets(a.suppression_interval, strict=False), a.lever


def test_sensitivity_intervals_from_replicas(answers):
    sens = answers.sensitivity
    assert sens.num_replicas == len(answers.uncertainty.models) == 200
    top = sens.rows[0]
    assert top.component == "gate_2q"
    for k in FIGURES:
        assert brackets(top.intervals[k]), k
    # the share interval is the percentile range of the same figure on each replica model
    shares = [m.terms(None)["gate_2q"] / m.inverse_suppression(None) for m in answers.uncertainty.models]
    lo, hi = replica_quantiles(shares)
    assert (top.intervals["share"].low, top.intervals["share"].high) == pytest.approx((min(lo, top.share),
                                                                                       max(hi, top.share)))
    # synthetic truth: share 0.2/0.47, Lambda with gate_2q halved 1/0.37 (hand arithmetic)
    assert top.intervals["share"].low <= 0.2 / 0.47 <= top.intervals["share"].high
    assert top.intervals["suppression_halved"].low <= 1 / 0.37 <= top.intervals["suppression_halved"].high
    assert brackets(sens.suppression_today_interval)


def test_roadmap_row_intervals(answers):
    rm = answers.roadmap
    d = rm.goal_distance
    assert d == 21 and d in rm.candidate_distances  # largest odd d with 2d^2-1 <= 1000
    for s in rm.steps:
        assert brackets(s.suppression_interval) and brackets(s.eps_intervals[d])
    last = rm.steps[-1]
    vals = [m.logical_error_per_cycle(last.scales, d) for m in answers.uncertainty.models]
    lo, hi = replica_quantiles(vals)
    assert last.eps_intervals[d].low == pytest.approx(min(lo, last.eps[d]), rel=1e-9)
    assert last.eps_intervals[d].high == pytest.approx(max(hi, last.eps[d]), rel=1e-9)


def test_json_adds_interval_keys_and_keeps_the_old_ones(answers):
    doc = answers.to_json()
    req = doc["requirements"]
    assert {"factor", "factor_interval", "suppression_factor", "suppression_factor_interval"} <= req["joint"].keys()
    mix = req["cheapest_mix"]
    assert {"scales", "cost_halvings", "suppression_factor", "scale_intervals", "cost_halvings_interval",
            "suppression_factor_interval", "cost_shares", "cost_share_intervals", "halvings"} <= mix.keys()
    assert set(mix["scale_intervals"]["gate_2q"]) == {"best", "low", "high"}
    assert {"suppression_factor_model", "suppression_factor_model_interval", "distance_interval",
            "logical_error_per_cycle_at_distance_interval"} <= req["today"].keys()
    assert "required_suppression_factor_interval" in req
    row = doc["sensitivity"]["components"][0]
    assert {"share_of_inverse_lambda", "share_interval", "elasticity_interval", "months_earlier_interval",
            "suppression_factor_halved_interval", "suppression_factor_perfect_interval"} <= row.keys()
    step = doc["roadmap"]["steps"][0]
    assert {"scales", "suppression_factor", "suppression_factor_interval",
            "logical_error_per_cycle_intervals"} <= step.keys()


def test_no_replicas_means_no_intervals():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(0.7, 1.0),
                            component_scales=(0.5,), shots=50_000, seed=1)
    a = answer_all(TARGET, stats, replicas=0)
    assert a.requirements.mix.scale_intervals == {} and a.requirements.mix.cost_interval is None
    assert all(r.intervals == {} for r in a.sensitivity.rows) and a.sensitivity.num_replicas == 0
    assert a.roadmap.steps[0].suppression_interval is None
    con = Console(width=80, record=True)
    tables.render_sensitivity(a.sensitivity, con)
    assert "no bootstrap" in con.export_text()


# ---- terminal tables ---------------------------------------------------------------------

#: an interval cut by a line break: "[" with no "]" after it on the line, or a "]" with no "["
CUT = re.compile(r"\[[^\]]*$|^[^\[]*\]")


def check_layout(text: str, width: int) -> None:
    for line in text.splitlines():
        assert len(line) <= width, line
        assert not CUT.search(line), f"interval split over lines: {line!r}"
        assert not re.search(r"[\d.]…|…\d", line), f"number truncated: {line!r}"


@pytest.mark.parametrize("width", [80, 60])
def test_tables_never_split_a_number(answers, width):
    con = Console(width=width, record=True)
    tables.render_fits(answers.fits, con, answers.model, tasks=False)
    tables.render_requirements(answers.requirements, con)
    tables.render_roadmap(answers.roadmap, con)
    tables.render_sensitivity(answers.sensitivity, con)
    text = con.export_text()
    check_layout(text, width)
    req = answers.requirements
    for figure in (tables.iv(req.joint.factor_interval), tables.iv(req.today.suppression_model_interval),
                   tables.iv(req.mix.cost_interval), tables.iv(answers.roadmap.steps[0].suppression_interval)):
        assert figure in text  # printed whole, on one line
    if width == 60:
        assert "(continued)" in text  # too wide tables fold instead of wrapping cells


def test_compact_tables_fit_80_columns_without_folding(answers):
    con = Console(width=80, record=True)
    tables.render_fits(answers.fits, con, answers.model, tasks=False)
    tables.render_requirements(answers.requirements, con)
    tables.render_roadmap(answers.roadmap, con)
    tables.render_sensitivity(answers.sensitivity, con)
    text = con.export_text()
    assert "(continued)" not in text and "95% intervals" in text
    assert "per task" not in text  # the compact fits have no per-task rows
    assert "Today: Lambda" in text and re.search(r"the goal needs\s+d = \d+ \[\d+, \d+\]", text)
    # the mix table lists only the components the mix changes
    mix = answers.requirements.mix
    block = text.split("Cheapest mix")[1].split("Mix total")[0]
    for c in COMPONENTS:
        assert (f"\n{c} " in block) == (c in mix.changed()), c


def test_detailed_fits_list_every_task(answers):
    con = Console(width=80, record=True)
    tables.render_fits(answers.fits, con, answers.model, tasks=True)
    text = con.export_text()
    check_layout(text, 80)
    assert "per task" in text and "ln A" in text
    n_rows = sum(1 for line in text.splitlines() if re.match(r"^(joint|gate_|readout|reset|idle)", line))
    # per task, per (point, distance) one row per basis and one for the bases combined, per Lambda
    per_distance = sum(len(p.per_basis) + 1 for p in answers.fits.distances)
    assert n_rows == len(answers.fits.tasks) + per_distance + len(answers.fits.lambdas)


def test_extrapolated_roadmap_rows_are_marked():
    # a fast gate_2q rate drives its factor below the smallest sampled 0.3 before the goal is met
    stats = synthetic_stats(weights={**W, "idle": 0.4}, prefactor=0.1, distances=(3, 5), joint_scales=(0.7, 1.0),
                            component_scales=(0.3,), shots=50_000, seed=4)
    target = parse_target(EXAMPLE_TOML + ROADMAP.replace("per_year = 0.2, spread = 0.05", "per_year = 0.6"))
    a = answer_all(target, stats, replicas=20)
    marked = [s for s in a.roadmap.steps if s.extrapolation]
    assert marked and all(s.scales["gate_2q"] < 0.3 for s in marked)
    con = Console(width=80, record=True)
    tables.render_roadmap(a.roadmap, con)
    text = con.export_text()
    check_layout(text, 80)
    assert f"{marked[0].date}" in text and tables.EXTRAPOLATED in text.split(str(marked[0].date))[1].splitlines()[0]
    assert not math.isnan(a.roadmap.steps[0].suppression)
