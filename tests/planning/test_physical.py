"""Answers in physical units, round-tripped through the noise stage's own formulas (the twirl of
Tomita & Svore, PRA 90, 062320 (2014), eqs. 9-10, and the RB conversion of Nielsen, Phys. Lett. A
303, 249 (2002), as implemented in planner.noise), and the time figures."""

from __future__ import annotations

import math

import pytest

from planner.circuits.timing import cycle_duration_ns
from planner.config import load_target
from planner.noise import NoiseModel, pauli_error_from_infidelity, twirl_idle
from planner.planning.physical import logical_pace, physical_value

MODEL = NoiseModel(gate_1q=6e-4, gate_2q=4.5e-3, readout=8e-3, reset=2e-3, t1_us=85.0, t2_us=70.0,
                   idle_excess=1e-4, idle_measure_excess=5e-4, gate_1q_ns=25, gate_2q_ns=35,
                   measure_ns=550, reset_ns=150)


@pytest.mark.parametrize("component, n", [("gate_1q", 1), ("gate_2q", 2)])
@pytest.mark.parametrize("f", [0.1, 0.5, 1.0])
def test_rb_infidelity_round_trips_through_the_noise_stage(component: str, n: int, f: float) -> None:
    v = physical_value(MODEL, component, f)
    assert v.values["pauli_error"] == pytest.approx(MODEL.probability(component) * f)
    assert pauli_error_from_infidelity(v.values["rb_infidelity"], num_qubits=n) == pytest.approx(v.values["pauli_error"])
    assert "RB infidelity" in v.text


@pytest.mark.parametrize("component", ["idle", "idle_measure"])
@pytest.mark.parametrize("f", [0.05, 0.3, 0.72, 1.0])
def test_required_t1_t2_give_the_scaled_twirled_channel(component: str, f: float) -> None:
    v = physical_value(MODEL, component, f)
    t = MODEL.gate_2q_ns if component == "idle" else MODEL.measure_ns + MODEL.reset_ns
    today = twirl_idle(duration_ns=t, t1_us=MODEL.t1_us, t2_us=MODEL.t2_us)
    there = twirl_idle(duration_ns=t, t1_us=v.values["t1_us"], t2_us=v.values["t2_us"])
    # every Pauli probability is f times today's (the scale as placed in the circuit)
    for a, b in ((there.px, today.px), (there.py, today.py), (there.pz, today.pz)):
        assert a == pytest.approx(f * b, rel=1e-9)
    excess = MODEL.idle_excess if component == "idle" else MODEL.idle_measure_excess
    assert v.values["excess"] == pytest.approx(f * excess)


def test_shorter_measurement_gives_the_scaled_total() -> None:
    v = physical_value(MODEL, "idle_measure", 0.5)
    t = MODEL.measure_ns + MODEL.reset_ns
    total = lambda d: twirl_idle(duration_ns=d, t1_us=MODEL.t1_us, t2_us=MODEL.t2_us).total  # noqa: E731
    assert total(v.values["layer_ns"]) == pytest.approx(0.5 * total(t), rel=1e-6)
    assert 0 < v.values["layer_ns"] < t and "measure+reset <=" in v.text


def test_a_component_at_zero_today_has_no_physical_value() -> None:
    zero = NoiseModel(gate_1q=0.0, gate_2q=1e-3, readout=1e-3, reset=0.0)
    assert "zero today" in physical_value(zero, "gate_1q", 0.5).text
    assert physical_value(zero, "gate_2q", None).factor is None


def test_demo_cycle_duration_and_pace() -> None:
    model = NoiseModel.from_target(load_target("targets/demo.toml"))
    # by hand from targets/demo.toml: 5 single-qubit layers of 25 ns, 4 CZ layers of 35 ns,
    # measure 550 ns + reset 150 ns in one layer
    assert cycle_duration_ns(model) == pytest.approx(5 * 25 + 4 * 35 + 550 + 150)
    pace = logical_pace(1e-6, cycle_duration_ns(model))
    assert pace.per_second == pytest.approx(-math.log1p(-2e-6) / 2 / 965e-9)
    assert pace.mean_seconds_between == pytest.approx(1 / pace.per_second)
