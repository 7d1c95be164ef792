"""The leakage model without sampling: the [device.leakage] section and its bad values (exit 2, one
line), what an absent section leaves unchanged (tasks, decoders, strong ids, fits), what a present
one puts into a task's identity, the component scale, the rate equations' limits and the dask
worker's hook."""

from __future__ import annotations

import pytest
import sinter
from typer.testing import CliRunner

from planner.cli import app
from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.noise import leakage_parameters
from planner.planning import answer_all
from planner.planning.leakage import population_curve, present_components, steady_state_two_level
from planner.sweep import plan_sweep, resolved_task, scale_points, task_metadata, tasks_for_scales
from tests.helpers.synthetic import PAULI_COMPONENTS, synthetic_stats

runner = CliRunner()
LEAK = "\n[device.leakage]\ngate_2q = 5e-4\nheating_per_us = 1e-4\ndecay_per_round = 0.1\nreset_removal = 0.5\n"


def _with_leakage(section: str = LEAK) -> str:
    return EXAMPLE_TOML.replace("[goal]", section + "\n[goal]")


@pytest.mark.parametrize(("line", "field"), [
    ("gate_2q = -1e-3", "device.leakage.gate_2q"),
    ("gate_2q = 1.5", "device.leakage.gate_2q"),
    ("heating_per_us = 2.0", "device.leakage.heating_per_us"),
    ("decay_per_round = -0.1", "device.leakage.decay_per_round"),
    ("transport = 1.01", "device.leakage.transport"),
    ("reset_removal = 1.2", "device.leakage.reset_removal"),
    ("data_removal = -0.5", "device.leakage.data_removal"),
    ("partner_px = 0.6\npartner_pz = 0.6", "device.leakage"),
    ("readout = \"two\"", "device.leakage.readout"),
    ("gate2q = 1e-3", "device.leakage.gate2q"),
])
def test_bad_leakage_values_exit_2_with_one_line(tmp_path, line, field):
    path = tmp_path / "t.toml"
    path.write_text(_with_leakage(f"\n[device.leakage]\n{line}\n"))
    result = runner.invoke(app, ["circuit", str(path), "--distance", "3"])
    assert result.exit_code == 2, result.stdout
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr
    assert str(path) in lines[0] and f"{field}:" in lines[0], lines[0]


def test_leakage_axis_without_the_section_exits_2(tmp_path):
    path = tmp_path / "t.toml"
    path.write_text(EXAMPLE_TOML.replace("[sweep]", "[sweep]\ncomponent_scales = [0.5]\ncomponents = [\"leakage\"]"))
    result = runner.invoke(app, ["circuit", str(path), "--distance", "3"])
    assert result.exit_code == 2 and "sweep.components" in result.stderr and "[device.leakage]" in result.stderr


def test_absent_section_keeps_tasks_and_strong_ids_as_before():
    target = parse_target(EXAMPLE_TOML)
    assert leakage_parameters(target) is None and "leakage" not in target.components
    for task in plan_sweep(target).tasks:
        meta = task.json_metadata
        assert task.decoder == "pymatching" and "leakage" not in meta
        # the task as it was built before the component existed: six components, no leakage
        before = dict(task_metadata(code=meta["code"], distance=meta["d"], basis=meta["basis"],
                                    rounds=meta["rounds"], axis=meta["axis"], factor=meta["factor"],
                                    scales=meta["scales"]))
        before["scales"] = {c: float(meta["scales"][c]) for c in PAULI_COMPONENTS}
        old = sinter.Task(circuit=task.circuit, decoder="pymatching", json_metadata=before)
        assert resolved_task(old).strong_id() == resolved_task(task).strong_id()


def test_present_section_is_part_of_the_task_identity():
    target = parse_target(_with_leakage())
    assert target.components == COMPONENTS
    assert [p.factor for p in scale_points(target) if p.axis == "leakage"] == []  # no component_scales
    (task,) = tasks_for_scales(target, {}, distances=[3], label="joint")[:1]
    assert task.decoder == "pymatching+leakage"
    assert task.json_metadata["leakage"]["gate_2q"] == 5e-4
    assert task.json_metadata["leakage"]["gate_2q_ns"] == 40.0
    other = parse_target(_with_leakage(LEAK.replace("reset_removal = 0.5", "reset_removal = 0.9")))
    (task2,) = tasks_for_scales(other, {}, distances=[3], label="joint")[:1]
    assert str(task.circuit) == str(task2.circuit)  # the Pauli circuit is the same ...
    assert resolved_task(task).strong_id() != resolved_task(task2).strong_id()  # ... the task is not


def test_the_leakage_scale_multiplies_injection_and_heating_only():
    target = parse_target(_with_leakage())
    half = leakage_parameters(target, 0.5)
    today = leakage_parameters(target)
    assert half["gate_2q"] == pytest.approx(today["gate_2q"] / 2)
    assert half["heating_per_us"] == pytest.approx(today["heating_per_us"] / 2)
    assert half["reset_removal"] == today["reset_removal"] and half["decay_per_round"] == today["decay_per_round"]
    (task,) = tasks_for_scales(target, {"leakage": 0.5}, distances=[3], label="leakage", factor=0.5)[:1]
    assert task.json_metadata["scales"]["leakage"] == 0.5 and task.json_metadata["leakage"] == half


def test_fits_without_leakage_give_it_no_weight_and_leave_it_out_of_the_answers():
    weights = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
    target = parse_target(EXAMPLE_TOML.replace("[sweep]", "[sweep]\ncomponent_scales = [0.5]"))
    stats = synthetic_stats(weights=weights, prefactor=0.1, distances=(3, 5), joint_scales=(0.5, 1.0),
                            component_scales=(0.5,), shots=50_000, seed=5)
    answers = answer_all(target, stats, seed=1, replicas=0)
    assert answers.model.weights["leakage"] == 0.0
    assert present_components(answers.model) == PAULI_COMPONENTS
    assert not any("leakage" in note for note in answers.model.extrapolation({c: 1.0 for c in COMPONENTS}))
    assert "leakage" not in [c.lever for c in answers.requirements.components]
    assert "leakage" not in [r.component for r in answers.sensitivity.rows]


def _rate_circuit():
    from planner.circuits import build_memory_circuit
    from planner.noise import NoiseModel

    return build_memory_circuit(NoiseModel.sd6(1e-3), code="surface", distance=3, rounds=4, basis="z")


BASE = {"gate_2q": 0.0, "heating_per_us": 0.0, "decay_per_round": 0.0, "transport": 0.0,
        "reset_removal": 0.0, "data_removal": 0.0}


def test_rate_equations_limits():
    c = _rate_circuit()
    assert population_curve(c, BASE).data == (0.0,) * 4  # nothing leaks
    full = population_curve(c, {**BASE, "gate_2q": 1e-2, "reset_removal": 1.0, "data_removal": 1.0})
    assert full.data == (0.0,) * 4 and full.measure == (0.0,) * 4  # everything removed each round
    # only injection and decay: the steady state of the two-level rate equation, with the
    # injection each data qubit sees per round (its CZs; the decay comes after them each round)
    g, r = 1e-3, 0.2
    curve = population_curve(c, {**BASE, "gate_2q": g, "decay_per_round": r})
    # a corner-free bulk check: the mean over data qubits lies between the 2-CZ and 4-CZ qubits'
    lo = (1 - r) * steady_state_two_level(leak_per_round=2 * g, return_per_round=r)
    hi = steady_state_two_level(leak_per_round=4 * g, return_per_round=r)
    assert lo < curve.steady_data < hi


def test_dask_worker_samples_a_leakage_chunk():
    from planner.sampling.chunks import sample_chunk

    target = parse_target(_with_leakage())
    (task,) = tasks_for_scales(target, {}, distances=[3], label="joint")[:1]
    sid = resolved_task(task).strong_id()
    result = sample_chunk(chunk_id="c1", strong_id=sid, circuit_text=str(task.circuit), decoder=task.decoder,
                          shots=300, leakage=task.json_metadata["leakage"])
    assert result.chunk_id == "c1" and result.shots >= 300 and 0 <= result.errors <= result.shots
