"""Model error: Lambda over distance windows and its drift, the response model's misfit flag, the
model-form part of every interval, and marginal verdicts. Synthetic data only (invented numbers,
known truth): no sampling."""

from __future__ import annotations

import math

import numpy as np
import pytest
from rich.console import Console

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.fits import DistanceFit, Interval, Z_SCORE, fit_lambda, fit_stats
from planner.planning import FactorAnswer, Uncertainty, answer_all, fit_model
from planner.planning.model import ModelData, fit_response
from planner.planning.modelerror import _marginal, combine_parts
from planner.reports import tables
from planner.reports.cells import lever_cells
from tests.helpers.synthetic import synthetic_stats

# invented budget: 1/Lambda = sum_c w_c s_c = 0.47 today, prefactor 0.1
W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
TARGET = parse_target(EXAMPLE_TOML)
GRID = dict(distances=(3, 5, 7), component_scales=(0.3, 0.6), shots=200_000)
REPLICAS = 40


def _points(ln_lambda_of_step, *, sigma=0.01, distances=(3, 5, 7, 9, 11), seed=0):
    """One scale point's per-distance rates: ln eps_3 = ln 0.01, then ln eps falls by
    ``ln_lambda_of_step(i)`` from the i-th distance to the next, plus noise of ``sigma``."""
    rng = np.random.default_rng(seed)
    ln, out = math.log(0.01), []
    for i, d in enumerate(distances):
        y = ln + rng.normal(0, sigma)
        out.append(DistanceFit(axis="joint", factor=1.0, scales=dict.fromkeys(COMPONENTS, 1.0), distance=d,
                               bases=("z",), zero_errors=False, log_sigma=sigma,
                               per_cycle=Interval(low=math.exp(y - Z_SCORE * sigma), best=math.exp(y),
                                                  high=math.exp(y + Z_SCORE * sigma))))
        ln -= ln_lambda_of_step(i)
    return out


def test_windows_and_known_drift_are_recovered():
    # ln Lambda 0.8 from d = 3 -> 5, shrinking by 0.1 per step: Lambda drifts down with d
    lf = fit_lambda(_points(lambda i: 0.8 - 0.1 * i))
    assert lf.sampled_distances == (3, 5, 7, 9, 11)
    assert lf.distances == (7, 9, 11)  # projection: what the largest distances say
    pairs = [w for w in lf.windows if len(w.distances) == 2]
    assert [w.distances for w in pairs] == [(3, 5), (5, 7), (7, 9), (9, 11)]
    # each pair's Lambda is its own step's (noise 0.01 per point: within 4 sigma of sqrt(2) * 0.01)
    for i, w in enumerate(pairs):
        assert abs(math.log(w.suppression.best) - (0.8 - 0.1 * i)) < 4 * math.sqrt(2) * 0.01
    # the projection Lambda is the 7, 9, 11 window's (mean step 0.55), not all five (0.6)
    assert abs(math.log(lf.suppression.best) - 0.55) < 0.03
    assert lf.drift.significant and lf.drift.per_step.low <= -0.1 <= lf.drift.per_step.high
    assert lf.drift.per_step.high < 0
    assert lf.window_spread > 0.2
    doc = lf.to_json()
    assert doc["drift"]["significant"] and len(doc["windows"]) == 7 and doc["distances"] == [7, 9, 11]


def test_no_drift_is_not_flagged():
    lf = fit_lambda(_points(lambda i: 0.7, seed=1))
    assert not lf.drift.significant
    assert lf.drift.per_step.low <= 0 <= lf.drift.per_step.high
    assert abs(math.log(lf.suppression.best) - 0.7) < 0.03


def test_three_distances_project_with_all_three():
    lf = fit_lambda(_points(lambda i: 0.7, distances=(3, 5, 7)))
    assert lf.distances == lf.sampled_distances == (3, 5, 7) and lf.drift is not None
    assert [w.distances for w in lf.windows] == [(3, 5), (5, 7), (3, 5, 7)]


def _misfit_stats():
    """Axes from W; the joint axis from a budget 1.4x larger: no additive form reproduces both."""
    axes = synthetic_stats(weights=W, prefactor=0.1, joint_scales=(1.0,), seed=4, **GRID)
    joint = synthetic_stats(weights={c: 1.4 * w for c, w in W.items()}, prefactor=0.1, joint_scales=(0.5, 0.7),
                            components=(), seed=5, **GRID)
    return axes + joint


@pytest.fixture(scope="module")
def misfit_answers():
    return answer_all(TARGET, _misfit_stats(), seed=1, replicas=REPLICAS)


@pytest.fixture(scope="module")
def fitting_answers():
    stats = synthetic_stats(weights=W, prefactor=0.1, joint_scales=(0.5, 0.7, 1.0), seed=3, **GRID)
    return answer_all(TARGET, stats, seed=1, replicas=REPLICAS)


def _rel_width(iv: Interval) -> float:
    return math.log(iv.high / iv.low)


def test_misfit_grid_raises_the_flag_and_widens_the_interval(misfit_answers):
    a = misfit_answers
    q = a.model.quality
    assert q.misfit and q.misfit_reasons and q.inflation > 3
    req = a.requirements
    assert req.model_misfit and req.joint.model_misfit
    assert all(c.model_misfit for c in req.components if c.sampled) and req.mix.model_misfit
    doc = req.to_json()
    assert doc["model_misfit"] and doc["joint"]["model_misfit"] and not doc["joint"]["reliable"]
    # the interval holds the misfit: at least sqrt(inflation) times the bootstrap's in log space
    unc = a.uncertainty
    samp, comb = unc.sampling_intervals["lambda_today"], unc.intervals["lambda_today"]
    assert _rel_width(comb) >= 0.95 * math.sqrt(q.inflation) * _rel_width(samp)
    assert unc.dominant["lambda_today"] == "model"
    part = doc["intervals"]["lambda_today"]
    assert part["sampling_interval"]["low"] == pytest.approx(samp.low) and part["dominant"] == "model"
    console = Console(record=True, width=100)
    tables.render_requirements(req, console)
    shown = console.export_text()
    assert "WARNING" in shown and "misfits" in shown and " !" in shown


def test_well_fitting_grid_carries_no_flag(fitting_answers):
    a = fitting_answers
    assert not a.model.quality.misfit and a.model.form == "linear"
    req = a.requirements
    assert not req.model_misfit and not req.joint.model_misfit and not req.mix.model_misfit
    assert req.to_json()["joint"]["reliable"]
    unc = a.uncertainty
    # windows add a model part, but no misfit part: the combined interval stays near the bootstrap's
    samp, comb = unc.sampling_intervals["joint_factor"], unc.intervals["joint_factor"]
    assert comb.low <= samp.low and samp.high <= comb.high
    assert _rel_width(comb) < 2.5 * _rel_width(samp)
    assert "misfits" not in " ".join(req.notes)


def test_combination_in_quadrature():
    samp = Interval(low=0.5 * math.exp(-0.1), best=0.5, high=0.5 * math.exp(0.1))
    comb, model, dom = combine_parts("joint_factor", 0.5, samp, [], 5.0)  # misfit part: 0.1 * sqrt(4)
    assert math.log(comb.high / 0.5) == pytest.approx(math.hypot(0.1, 0.2))
    assert math.log(model.high / 0.5) == pytest.approx(0.2) and dom == "model"
    comb, _, dom = combine_parts("mix.share.gate_2q", 0.9, Interval(low=0.8, best=0.9, high=1.0), [0.7], 1.0)
    assert comb.high == 1.0 and comb.low == pytest.approx(0.9 - math.hypot(0.1, 0.2)) and dom == "model"


def _unc(frac=None, lam=None):
    return Uncertainty(replicas=100, intervals={"lambda.idle": lam} if lam else {},
                       reachable_fraction=frac or {}, models=())


def test_marginal_verdicts():
    reached = FactorAnswer(lever="idle", reachable=True, factor=0.002, suppression=2.5)
    missed = FactorAnswer(lever="idle", reachable=False, factor=None, suppression=2.3)
    need = Interval(low=2.45, best=2.5, high=2.55)
    # reached on half of the replicas: marginal; on all (or none) of them: a verdict
    assert _marginal(reached, "factor.idle", _unc({"factor.idle": 0.5}), need, 2.5)
    assert not _marginal(reached, "factor.idle", _unc({"factor.idle": 0.97}), need, 2.5)
    # not reachable alone, but the Lambda with idle perfect reaches the needed one within its interval
    near = _unc({"factor.idle": 0.02}, Interval(low=2.0, best=2.3, high=2.6))
    far = _unc({"factor.idle": 0.0}, Interval(low=1.9, best=2.0, high=2.1))
    assert _marginal(missed, "factor.idle", near, need, 2.5)
    assert not _marginal(missed, "factor.idle", far, need, 2.5)
    flagged = FactorAnswer(lever="idle", reachable=True, factor=0.002, suppression=2.5, marginal=True,
                           factor_interval=Interval(low=0.0, best=0.002, high=0.05))
    assert flagged.verdict == "marginal" and flagged.to_json()["verdict"] == "marginal"
    assert lever_cells(flagged)[0].startswith("marginal")


def test_chosen_form_is_judged_on_held_out_points(misfit_answers):
    model = fit_model(fit_stats(_misfit_stats()))
    assert model.form in ("linear", "quadratic", "interaction")
    assert model.quality.loo_max_abs_residual is not None
    assert model.to_json()["quality"]["limits"]["chi2_per_dof"] == 3.0


def test_near_threshold_grid_fits_or_carries_the_flag_on_every_answer():
    # invented device near threshold (Lambda today ~1.15) whose budget grows faster than linearly:
    # the fit either stays within the limits or every answer built on it says so
    near = {c: 0.9 * w for c, w in W.items()}
    curv = {c: 0.8 * w for c, w in W.items()}
    stats = synthetic_stats(weights=near, curvature=curv, prefactor=0.1, joint_scales=(0.5, 0.7, 1.0), seed=6,
                            **GRID)
    a = answer_all(TARGET, stats, seed=2, replicas=20)
    q, req = a.model.quality, a.requirements
    assert q.misfit == bool(q.misfit_reasons) == req.model_misfit
    if q.misfit:  # the limits: chi2/dof 3 and 3 sigma held out (model.py)
        assert (q.chi2_per_dof or 0) > 3 or (q.loo_max_abs_residual or 0) > 3
    doc = req.to_json()
    for ans in (doc["joint"], *(c for c in doc["components"] if c["sampled"])):
        assert ans["model_misfit"] == q.misfit and (not ans["reliable"] if q.misfit else True), ans["lever"]
    assert doc["cheapest_mix"]["model_misfit"] == doc["today"]["model_misfit"] == q.misfit
    # curvature in the truth (seeded draw): the linear form misfits, the quadratic predicts the
    # held-out points better, is chosen, and fits within the limits
    linear = fit_response(ModelData.from_fits(a.fits), form="linear").quality
    assert linear.misfit and a.model.form == "quadratic" and not q.misfit


def test_larger_distances_at_some_points_project_with_them():
    # today's point also at d = 9, 11 (as the sweep does where the answers depend on it)
    base = synthetic_stats(weights=W, prefactor=0.1, joint_scales=(0.5, 0.7, 1.0), seed=7, **GRID)
    extra = synthetic_stats(weights=W, prefactor=0.1, distances=(9, 11), joint_scales=(1.0,), components=(),
                            shots=2_000_000, seed=8)
    a = answer_all(TARGET, base + extra, seed=3, replicas=REPLICAS)
    today = a.fits.today()
    assert today.sampled_distances == (3, 5, 7, 9, 11) and today.distances == (7, 9, 11)
    others = [lf for lf in a.fits.lambdas if lf is not today]
    assert all(lf.distances == (3, 5, 7) for lf in others)
    me = a.uncertainty.model_error
    assert set(me.window_models) == {"lowest pair", "highest pair", "lowest three"}
    # truth 1/0.47 (no drift in the synthetic law) within the combined interval
    iv = a.requirements.today.suppression_model_interval
    assert iv.low <= 1 / 0.47 <= iv.high
