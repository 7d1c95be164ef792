"""Model, requirements (ask), calculator: exact checks against hand arithmetic and brute force."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.errors import InputError
from planner.fits import fit_stats
from planner.planning import calculate, fit_model, requirements
from planner.planning.ask import cheapest_mix, choose_distance, mix_cost
from planner.planning.model import FitQuality, ResponseModel, largest_distance_within, physical_qubits
from tests.helpers.synthetic import synthetic_stats

W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
TARGET = parse_target(EXAMPLE_TOML)


def make_model(weights, *, ln_a=math.log(0.1), ln_a_coef=None, lo=0.5):
    q = FitQuality(None, 0.0, None, None, 0, "")
    return ResponseModel("linear", {c: weights.get(c, 0.0) for c in COMPONENTS}, {c: 0.0 for c in COMPONENTS},
                         {c: (ln_a_coef or {}).get(c, 0.0) for c in COMPONENTS}, ln_a,
                         {c: lo for c in COMPONENTS}, {c: 1.0 for c in COMPONENTS}, (), q)


# ---- exact: the ansatz and 2d^2-1 (Google Quantum AI, Nature 638, 920 (2025), eq. 1 and introduction)

def test_qubits_and_distance_from_budget():
    # 2 d^2 - 1: Nature 638, 920 (2025), introduction (checks.md)
    assert [physical_qubits(d) for d in (3, 5, 7)] == [17, 49, 97]
    assert largest_distance_within(1000) == 21  # 2*21^2-1 = 881 <= 1000 < 2*23^2-1 = 1057
    assert largest_distance_within(16) is None


def test_calculator_matches_hand_arithmetic():
    # eps_d = eps_D * Lambda^(-(d-D)/2): Nature 638, 920 (2025), eq. 1 (checks.md)
    a = calculate(suppression=3.0, eps=2e-3, distance=5, eps_target=1e-7)
    # hand: need 3^n >= 2e4 -> n = 10 (3^9 = 19683 < 2e4 <= 59049): d = 5 + 20 = 25
    assert a.distance == 25 and a.physical_qubits == 2 * 25**2 - 1 == 1249
    assert a.logical_error_per_cycle == pytest.approx(2e-3 / 3**10)
    # A = eps_5 * 3^3 = 0.054; required Lambda at d=5: (A / 1e-7)^(1/3)
    assert a.prefactor == pytest.approx(0.054)
    assert a.required_suppression == pytest.approx((0.054 / 1e-7) ** (1 / 3))
    j = a.to_json()
    assert {"distance", "physical_qubits", "logical_error_per_cycle"} <= j.keys()


def test_calculator_goal_met_at_smaller_distance():
    a = calculate(suppression=2.0, eps=1e-4, distance=7, eps_target=1e-3)
    # eps_3 = 1e-4 * 2^2 = 4e-4 <= 1e-3: distance 3 (hand arithmetic)
    assert a.distance == 3 and a.logical_error_per_cycle == pytest.approx(4e-4)


def test_calculator_below_one_is_not_reachable():
    a = calculate(suppression=0.8, eps=1e-3, distance=5, eps_target=1e-6)
    assert not a.reachable and a.distance is None and "not reachable" in a.note


@pytest.mark.parametrize("kw", [dict(suppression=-1, eps=1e-3, distance=5, eps_target=1e-6),
                                dict(suppression=2, eps=0.7, distance=5, eps_target=1e-6),
                                dict(suppression=2, eps=1e-3, distance=4, eps_target=1e-6)])
def test_calculator_bad_input(kw):
    with pytest.raises(InputError):
        calculate(**kw)


# ---- requirements on a known model

def test_joint_and_component_factors_exact():
    m = make_model(W)  # 1/Lambda = 0.47 at today
    r = requirements(m, TARGET, eps_target=1e-6, distance=11)
    # hand: 0.1 * (0.47 s)^6 = 1e-6 -> s = (1e-5)^(1/6) / 0.47
    assert r.joint.factor == pytest.approx(1e-5 ** (1 / 6) / 0.47, rel=1e-9)
    g2 = next(a for a in r.components if a.lever == "gate_2q")
    # 0.27 + 0.2 s = (1e-5)^(1/6) = 0.14678 < 0.27: gate_2q alone cannot do it; perfect -> 1/0.27
    assert not g2.reachable and g2.suppression == pytest.approx(1 / 0.27)
    assert "not reachable alone" in g2.note
    r2 = requirements(m, TARGET, eps_target=5e-3, distance=5)
    g2 = next(a for a in r2.components if a.lever == "gate_2q")
    # 0.1 (0.27 + 0.2 s)^3 = 5e-3 -> s = (0.05^(1/3) - 0.27) / 0.2 = 0.492
    assert g2.reachable and g2.factor == pytest.approx((0.05 ** (1 / 3) - 0.27) / 0.2, rel=1e-9)
    assert r2.required_suppression == pytest.approx((0.1 / 5e-3) ** (1 / 3))


def test_extrapolation_is_flagged_with_ratio():
    m = make_model(W, lo=0.5)
    r = requirements(m, TARGET, eps_target=1e-6, distance=11)
    assert r.joint.factor < 0.5
    assert any(f"x{0.5 / r.joint.factor:.2f}" in n for n in r.joint.extrapolation)


def test_goal_already_met_today():
    m = make_model({"gate_2q": 0.05, "readout": 0.05})  # Lambda 10
    r = requirements(m, TARGET, eps_target=1e-3, distance=7)
    assert r.joint.factor >= 1 and "already met" in r.joint.note
    assert r.mix.cost == 0.0 and r.today.distance == 3  # 0.1 * 0.1^2 = 1e-3 at d = 3


def test_above_threshold_today():
    m = make_model({"gate_2q": 0.8, "readout": 0.4})  # Lambda 0.83
    r = requirements(m, TARGET, eps_target=1e-6, distance=11)
    assert r.today.above_threshold and r.today.distance is None and "above threshold" in r.today.note
    assert r.joint.reachable and r.joint.factor < 1 / 1.2


def test_cheapest_mix_beats_brute_force_grid():
    m = make_model({"gate_2q": 0.25, "readout": 0.15, "idle": 0.1})
    costs = {"gate_2q": 3.0, "readout": 1.0, "idle": 2.0}
    d, eps = 9, 1e-5
    mix = cheapest_mix(m, distance=d, eps_target=eps, costs=costs)
    assert mix.reachable
    assert m.logical_error_per_cycle(mix.scales, d) == pytest.approx(eps, rel=1e-6)
    grid = np.linspace(0.01, 1.0, 100)
    best = math.inf
    for a, b, c in itertools.product(grid, grid, grid[::3]):
        s = {"gate_2q": a, "readout": b, "idle": c}
        if m.ln_eps(s, d) <= math.log(eps):
            best = min(best, mix_cost(s, costs))
    # the optimiser's cost is no worse than the best grid point (exact on the model)
    assert mix.cost <= best + 1e-6
    assert mix.cost >= best - 0.15  # and the grid is fine enough to come close


def test_distance_choice():
    assert choose_distance(TARGET, qubits=100) == (7, "from --qubits (100)")
    assert choose_distance(TARGET)[0] == 21
    with pytest.raises(InputError):
        choose_distance(TARGET, distance=6)
    with pytest.raises(InputError):
        choose_distance(TARGET, distance=5, qubits=100)


# ---- properties (hypothesis)

weights_st = st.fixed_dictionaries({c: st.floats(0.0, 0.3) for c in COMPONENTS}).filter(
    lambda w: sum(w.values()) > 0.05)


@settings(max_examples=30, deadline=None)
@given(weights_st, st.sampled_from(COMPONENTS), st.floats(0.0, 0.99))
def test_improving_a_component_never_lowers_lambda(w, comp, f):
    m = make_model(w)
    assert m.suppression({comp: f}) >= m.suppression(None)


@settings(max_examples=25, deadline=None)
@given(weights_st, st.floats(1e-9, 1e-3), st.sampled_from([5, 9, 15]))
def test_answers_fed_back_land_on_goal(w, eps, d):
    m = make_model(w)
    r = requirements(m, TARGET, eps_target=eps, distance=d)
    for a in (r.joint, *r.components):
        if a.reachable and a.factor is not None and "already" not in a.note:
            s = {c: (a.factor if a.lever in ("joint", c) else 1.0) for c in COMPONENTS}
            assert m.logical_error_per_cycle(s, d) == pytest.approx(eps, rel=1e-6)
    if r.mix.reachable and r.mix.cost:
        assert m.ln_eps(r.mix.scales, d) <= math.log(eps) + 1e-6


def test_model_recovers_weights_from_synthetic_samples():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5, 7), joint_scales=(0.5, 0.75, 1.0),
                            component_scales=(0.5,), shots=300_000, seed=11)
    m = fit_model(fit_stats(stats))
    assert m.form == "linear"
    assert m.quality.chi2_per_dof is not None and m.quality.chi2_per_dof < 3
    for c, w in W.items():
        # each weight within 25% or 0.01 of the synthetic truth (several-sigma tolerance)
        assert abs(m.weights[c] - w) <= max(0.25 * w, 0.01), c


def test_curvature_form_chosen_when_linear_fails_held_out():
    curv = {"gate_2q": 0.6}
    stats = synthetic_stats(weights={**W, "gate_2q": 0.02}, curvature=curv, prefactor=0.1, distances=(3, 5, 7),
                            joint_scales=(0.3, 0.5, 0.75, 1.0), component_scales=(0.2, 0.4, 0.6, 0.8),
                            components=("gate_2q", "readout"), shots=400_000, seed=5)
    m = fit_model(fit_stats(stats))
    assert m.form == "quadratic"
    assert m.curvature["gate_2q"] > 0.3
    lin = fit_model(fit_stats(stats), form="linear")
    assert lin.quality.loo_max_abs_residual > m.quality.loo_max_abs_residual


def test_goal_distance_beyond_the_sampled_ones_is_called_an_extrapolation():
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(0.5, 1.0),
                            component_scales=(0.5,), shots=100_000, seed=3)
    report = fit_stats(stats)
    m = fit_model(report)
    target = parse_target(EXAMPLE_TOML)
    far = requirements(m, target, distance=11, report=report)
    assert any("beyond the largest sampled distance 5" in n and "3 more factors" in n for n in far.notes)
    near = requirements(m, target, distance=5, report=report)
    assert not any("beyond" in n for n in near.notes)
