"""Calculator mode with a qubit budget and uncertain inputs, checked against hand arithmetic.

The ansatz eps_d = A Lambda^-(d+1)/2 is Google Quantum AI, Nature 638, 920 (2025), eq. 1; a
rotated surface code needs 2 d^2 - 1 qubits (same paper). Propagating independent log-normal
inputs through ln eps_d = ln eps_D - (d - D)/2 ln Lambda is the delta method, exact here because
the relation is linear in the logarithms (common practice, no source).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.errors import InputError
from planner.planning import calculate

Z95 = 1.959963984540054  # two-sided 95% normal quantile


def test_qubit_budget_gives_the_largest_distance_within_it() -> None:
    a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6, qubits=1000)
    # by hand: 2*21^2-1 = 881 <= 1000 < 2*23^2-1 = 1057
    assert (a.budget_distance, a.budget_physical_qubits) == (21, 881)
    assert a.budget_logical_error_per_cycle == pytest.approx(1e-3 * 2.0 ** -8)  # (21-5)/2 = 8 halvings
    assert a.budget_meets_target is False
    rep = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6, qubits=41, code="repetition")
    assert rep.budget_distance == 21  # 2*21-1 = 41


def test_eps_interval_matches_the_hand_computation() -> None:
    a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6,
                  suppression_sigma=0.1, eps_sigma=1e-4)
    assert a.distance == 25
    # ln-space sd at d = 25: sqrt((1e-4/1e-3)^2 + ((25-5)/2 * 0.1/2)^2) = sqrt(0.01 + 0.25)
    sd = math.sqrt(0.01 + 0.25)
    iv = a.intervals["logical_error_per_cycle"]
    best = 1e-3 * 2.0 ** -10
    assert iv.best == pytest.approx(best)
    assert (iv.low, iv.high) == pytest.approx((best * math.exp(-Z95 * sd), best * math.exp(Z95 * sd)))
    # required Lambda at D = 5 (k = 3): ln req = ln Lambda + (ln eps - ln eps_t)/3
    req = a.intervals["required_suppression_factor"]
    sd_req = math.hypot(0.05, 0.1 / 3)
    assert req.best == pytest.approx(2.0 * 1000 ** (1 / 3))
    assert req.high == pytest.approx(req.best * math.exp(Z95 * sd_req))


def test_distance_interval_agrees_with_direct_draws() -> None:
    a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6, suppression_sigma=0.2)
    rng = np.random.default_rng(123)  # an independent draw, not the calculator's own seed
    lam = 2.0 * np.exp(0.1 * rng.standard_normal(200_000))
    d = 5 + 2 * np.ceil(np.log(1e-3 / 1e-6) / np.log(lam))
    lo, hi = np.quantile(d, [0.025, 0.975])
    assert a.intervals["distance"].low == pytest.approx(lo, abs=2)
    assert a.intervals["distance"].high == pytest.approx(hi, abs=2)
    assert a.intervals["distance"].low <= 25 <= a.intervals["distance"].high
    q = a.intervals["physical_qubits"]
    dl, dh = a.intervals["distance"].low, a.intervals["distance"].high
    assert (q.low, q.high) == (2 * dl ** 2 - 1, 2 * dh ** 2 - 1)


def test_exact_inputs_carry_no_interval() -> None:
    a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6)
    assert a.intervals == {} and a.to_json()["intervals"] == {}


@pytest.mark.parametrize("kw, field", [({"suppression_sigma": 2.5}, "suppression_sigma"),
                                       ({"eps_sigma": -1e-4}, "eps_sigma"),
                                       ({"suppression_sigma": float("nan")}, "suppression_sigma"),
                                       ({"qubits": 5}, "qubits")])
def test_bad_uncertainty_or_budget_is_an_input_error(kw: dict, field: str) -> None:
    with pytest.raises(InputError) as err:
        calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6, **kw)
    assert err.value.field == field


def test_command_line_takes_qubits_and_sigmas() -> None:
    runner = CliRunner()
    res = runner.invoke(app, ["ask", "--lambda", "2", "--eps", "1e-3", "--distance", "5", "--target", "1e-6",
                              "--qubits", "1000", "--eps-sigma", "1e-4", "--json"])
    assert res.exit_code == 0, res.stderr
    import json

    doc = json.loads(res.stdout)
    assert doc["budget_distance"] == 21 and doc["distance"] == 25
    assert doc["intervals"]["budget_logical_error_per_cycle"]["low"] < doc["budget_logical_error_per_cycle"]
    bad = runner.invoke(app, ["ask", "--lambda", "2", "--eps", "1e-3", "--distance", "5", "--target", "1e-6",
                              "--lambda-sigma", "5"])
    assert bad.exit_code == 2 and bad.stderr.count("\n") == 1 and "--lambda-sigma" in bad.stderr
    stray = runner.invoke(app, ["ask", ".", "--eps-sigma", "1e-4"])
    assert stray.exit_code == 2 and "calculator mode" in stray.stderr
