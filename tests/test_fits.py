"""Fits: per-cycle conversion, interval level, Lambda recovery, threshold, edge cases."""

from __future__ import annotations

import math

import numpy as np
import pytest
import sinter
from scipy.stats import beta

from planner.fits import (
    LIKELIHOOD_FACTOR,
    DistanceFit,
    Interval,
    fit_lambda,
    fit_stats,
    per_cycle_interval,
    weighted_line,
)
from tests.helpers.synthetic import synthetic_stats

W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}


def test_likelihood_factor_matches_wilks_95():
    # Wilks: 2 ln LF = chi2_1 quantile 3.841 (common practice, no source)
    assert math.isclose(2 * math.log(LIKELIHOOD_FACTOR), 3.841458820694124, rel_tol=1e-9)


@pytest.mark.parametrize("shots,errors,rounds", [(10_000, 100, 5), (1000, 300, 3), (50_000, 7, 9)])
def test_per_cycle_is_the_published_formula(shots, errors, rounds):
    # eps = (1 - (1 - 2 P)^(1/r)) / 2 : Google Quantum AI, Nature 614, 676 (2023), methods (checks.md)
    shot, cyc = per_cycle_interval(shots=shots, errors=errors, rounds=rounds)
    for p, e in ((shot.best, cyc.best), (shot.low, cyc.low), (shot.high, cyc.high)):
        assert math.isclose(e, (1 - (1 - 2 * p) ** (1 / rounds)) / 2, rel_tol=1e-9)
    assert math.isclose(shot.best, errors / shots)
    assert shot.low < shot.best < shot.high


def test_interval_close_to_exact_binomial_interval():
    # the LR interval and the Clopper-Pearson interval agree loosely at 100 hits (common practice, no source)
    shot, _ = per_cycle_interval(shots=10_000, errors=100, rounds=1)
    cp_low, cp_high = beta.ppf(0.025, 100, 9901), beta.ppf(0.975, 101, 9900)
    assert shot.low == pytest.approx(cp_low, rel=0.05)
    assert shot.high == pytest.approx(cp_high, rel=0.05)


def test_interval_coverage_near_95_percent():
    # coverage of a 95% interval over seeded draws: 95% +- 2.5% (binomial spread of 600 trials ~0.9%)
    rng = np.random.default_rng(7)
    p, n, hits = 0.01, 5000, 0
    for k in rng.binomial(n, p, size=600):
        shot, _ = per_cycle_interval(shots=n, errors=int(k), rounds=1)
        hits += shot.low <= p <= shot.high
    assert 0.925 <= hits / 600 <= 0.975


def test_weighted_line_recovers_exact_line():
    f = weighted_line([2, 3, 4, 5], [1.0, 0.5, 0.0, -0.5], [0.1, 0.2, 0.1, 0.3])
    assert f.slope == pytest.approx(-0.5)
    assert f.intercept == pytest.approx(2.0)


def test_recovers_known_lambda_within_interval():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5, 7), joint_scales=(0.5, 1.0),
                            component_scales=(0.5,), shots=200_000, seed=3)
    report = fit_stats(stats)
    for lf in report.lambdas:
        true = 1 / sum(W[c] * lf.scales[c] for c in W)
        assert lf.suppression.low <= true <= lf.suppression.high, (lf.axis, lf.factor)
        # the prefactor too: ln A = ln 0.1 (synthetic truth)
        assert lf.ln_prefactor.low <= math.log(0.1) <= lf.ln_prefactor.high
    today = report.today()
    assert today is not None and today.suppression.best == pytest.approx(1 / sum(W.values()), rel=0.05)


def test_bases_are_averaged():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(1.0,), shots=100_000)
    report = fit_stats(stats)
    for dfit in report.distances:
        tasks = [t for t in report.tasks if t.distance == dfit.distance and t.axis == dfit.axis]
        assert len(tasks) == 2
        assert dfit.per_cycle.best == pytest.approx(sum(t.per_cycle.best for t in tasks) / 2)
        assert dfit.per_cycle.low < dfit.per_cycle.best < dfit.per_cycle.high


def test_threshold_bracketed_by_joint_points():
    # 1/Lambda = 0.47 s: Lambda = 1 at s = 1/0.47 = 2.128 (synthetic truth)
    stats = synthetic_stats(weights=W, prefactor=0.05, distances=(3, 5), joint_scales=(1.0, 1.5, 2.5, 3.0),
                            shots=200_000, seed=1)
    th = fit_stats(stats).threshold
    assert th.factor is not None
    assert th.factor.low <= 1 / 0.47 <= th.factor.high
    assert th.factor.best == pytest.approx(1 / 0.47, rel=0.1)


def test_threshold_not_bracketed_says_so():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(0.5, 1.0), shots=50_000)
    th = fit_stats(stats).threshold
    assert th.factor is None and "above the sampled range" in th.note


def test_single_distance_gives_no_lambda_and_says_so():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(5,), joint_scales=(0.5, 1.0), shots=10_000)
    report = fit_stats(stats)
    assert all(lf.suppression is None and "two distances" in lf.note for lf in report.lambdas)
    assert any("single distance" in n for n in report.notes)
    assert report.to_json()["lambda"][0]["suppression_factor"] is None


def test_zero_error_points_use_upper_end_and_are_flagged():
    meta = lambda d: {"code": "surface", "d": d, "basis": "z", "rounds": d, "axis": "joint", "factor": 0.2,  # noqa: E731
                      "scales": {c: 0.2 for c in W}}
    stats = [sinter.TaskStats(strong_id="a", decoder="pymatching", json_metadata=meta(3), shots=10_000, errors=40),
             sinter.TaskStats(strong_id="b", decoder="pymatching", json_metadata=meta(5), shots=10_000, errors=0)]
    report = fit_stats(stats)
    zero = [t for t in report.tasks if t.zero_errors]
    assert len(zero) == 1 and zero[0].per_cycle.low == 0.0 and zero[0].per_cycle.high > 0
    d5 = next(d for d in report.distances if d.distance == 5)
    assert d5.zero_errors and d5.per_cycle.best == pytest.approx(zero[0].per_cycle.high)
    lf = report.lambdas[0]
    assert lf.uses_zero_error_points and "upper bound" in lf.note
    # an upper bound on eps_5 is a lower bound on the true Lambda: the estimate is finite and > 1
    assert lf.suppression is not None and 1 < lf.suppression.best < math.inf
    assert any("zero errors" in n for n in report.notes)


def test_lambda_fit_exact_on_noise_free_rates():
    pts = [DistanceFit(axis="joint", factor=1.0, scales={}, distance=d, bases=("z",), per_cycle=Interval(low=e * 0.9, best=e, high=e * 1.1), zero_errors=False, log_sigma=0.05)
           for d, e in ((3, 0.01 / 2**2), (5, 0.01 / 2**3), (7, 0.01 / 2**4))]
    lf = fit_lambda(pts)
    assert lf.suppression.best == pytest.approx(2.0)
    assert lf.ln_prefactor.best == pytest.approx(math.log(0.01))
