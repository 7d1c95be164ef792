"""The sweep plan: grid expansion, one metadata key set, stable strong ids."""

from __future__ import annotations

import json

import pytest

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.errors import InputError
from planner.sweep import resolved_task
from planner.sweep import BUDGETS, METADATA_KEYS, ScalePoint, plan_sweep, scale_points, tasks_for_scales


@pytest.fixture(scope="module")
def target():
    text = EXAMPLE_TOML.replace("joint_scales = [0.5, 1.0]",
                                "joint_scales = [0.5, 1.0]\ncomponent_scales = [0.5, 1.0, 2.0]")
    return parse_target(text, source="example.toml")


def test_points_joint_axis_then_one_axis_per_component(target):
    points = scale_points(target)
    joint = [p.factor for p in points if p.axis == "joint"]
    assert joint == [0.5, 1.0]
    assert "leakage" not in target.components  # the example has no [device.leakage]: no axis
    for comp in target.components:
        # factor 1.0 on a component axis is today's device, already the joint 1.0 point
        assert sorted(p.factor for p in points if p.axis == comp) == [0.5, 2.0]
    assert len(points) == 2 + 2 * len(target.components)


def test_scale_point_scales():
    assert ScalePoint(axis="readout", factor=0.25).scales() == {
        c: (0.25 if c == "readout" else 1.0) for c in COMPONENTS}
    with pytest.raises(ValueError):
        ScalePoint(axis="nonsense", factor=1.0).scales()


def test_tasks_have_one_json_native_key_set_and_largest_first(target):
    plan = plan_sweep(target, budget="quick")
    assert len(plan.tasks) == len(plan.points) * 2 * 2 * 2  # distances x round counts x bases
    sizes = [t.json_metadata["d"] * t.json_metadata["rounds"] for t in plan.tasks]
    assert sizes == sorted(sizes, reverse=True)
    for t in plan.tasks:
        assert tuple(t.json_metadata) == METADATA_KEYS
        assert json.loads(json.dumps(t.json_metadata)) == t.json_metadata
        # default round counts: r = d and r = 3d
        assert t.json_metadata["rounds"] in (t.json_metadata["d"], 3 * t.json_metadata["d"])
        # without [device.leakage] a task carries no leakage scale (strong ids as before it existed)
        assert set(t.json_metadata["scales"]) == set(COMPONENTS) - {"leakage"}
        assert t.decoder == "pymatching"
    ids = [resolved_task(t).strong_id() for t in plan.tasks]
    assert len(set(ids)) == len(ids)
    again = plan_sweep(target, budget="quick")
    assert [resolved_task(t).strong_id() for t in again.tasks] == ids  # resuming finds the same tasks


def test_scaled_circuit_differs_and_rule_from_budget(target):
    plan = plan_sweep(target, budget="standard")
    assert plan.rule == BUDGETS["standard"]
    base = tasks_for_scales(target, {}, distances=[3], label="joint")
    half = tasks_for_scales(target, {"gate_2q": 0.5}, distances=[3], label="gate_2q", factor=0.5)
    assert str(base[0].circuit) != str(half[0].circuit)
    assert "DEPOLARIZE2(0.0025)" in str(half[0].circuit)


def test_bad_budget_and_impossible_scale(target):
    with pytest.raises(InputError, match="budget"):
        plan_sweep(target, budget="weekend")
    with pytest.raises(InputError, match="invalid noise model"):
        tasks_for_scales(target, {"readout": 100.0}, distances=[3], label="x")
