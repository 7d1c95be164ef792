"""The sweep's reach distances: the joint axis sampled beyond the grid only when the goal lies
far beyond it (``sweep.reach_distances``). Plans only: nothing here samples."""

from __future__ import annotations

import pytest

from planner.config import parse_target
from planner.errors import InputError
from planner.jobs.sweep import plan_with_reach
from planner.sweep import plan_sweep, reach_distances, reach_tasks
from tests.helpers.targets import TINY_REPETITION


def tiny(reach: str, *, max_qubits: int | None = None, distances: str = "[3, 5]"):
    """The tiny repetition target with ``reach_distances = <reach>`` (TOML text) and the goal's qubits."""
    text = TINY_REPETITION.format(p=0.02).replace("distances = [3, 5]", f"distances = {distances}")
    text = text.replace("[sweep]", f"[sweep]\nreach_distances = {reach}")
    if max_qubits is not None:
        text = text.replace("[goal]", f"[goal]\nmax_qubits = {max_qubits}")
    return parse_target(text)


def test_auto_adds_two_steps_only_when_the_goal_is_far():
    t = tiny('"auto"', distances="[3, 5, 7]")
    assert reach_distances(t, goal_distance=21) == (9, 11)
    assert reach_distances(t, goal_distance=11) == (9, 11)  # the goal itself is the second step
    assert reach_distances(t, goal_distance=9) == ()  # one step beyond the grid: not far
    assert reach_distances(t, goal_distance=7) == ()
    assert reach_distances(t, goal_distance=13) == (9, 11)  # never beyond d_max + 4


def test_listed_and_empty():
    assert reach_distances(tiny("[9, 7, 5]"), goal_distance=99) == (7, 9)  # the grid's own 5 left out
    assert reach_distances(tiny("[]"), goal_distance=99) == ()
    # the default is none: a file's grid costs what it lists
    plain = parse_target(TINY_REPETITION.format(p=0.02))
    assert plain.sweep.reach_distances == () and reach_distances(plain, goal_distance=99) == ()


def test_reach_tasks_are_on_every_joint_point_with_the_grid_labels():
    t = tiny('"auto"')
    tasks = reach_tasks(t, goal_distance=21)
    metas = [task.json_metadata for task in tasks]
    assert {m["d"] for m in metas} == {7, 9}
    assert {m["axis"] for m in metas} == {"joint"}
    assert sorted({m["factor"] for m in metas}) == [0.5, 1.0]  # today's device and the other joint point
    # 2 distances x 2 joint points x 2 round counts (r = d, 3d) x 1 basis (repetition: z only)
    assert len(tasks) == 2 * 2 * 2
    assert set(metas[0]) == {"code", "d", "basis", "rounds", "axis", "factor", "scales"}
    assert reach_tasks(t, goal_distance=7) == []


def test_plan_with_reach_adds_tasks_only_when_the_goal_distance_is_far():
    # repetition code: 2d - 1 qubits; max_qubits 9 -> goal d = 5 (inside the grid), 39 -> d = 19
    near = tiny('"auto"', max_qubits=9)
    far = tiny('"auto"', max_qubits=39)
    assert plan_with_reach(near).tasks == plan_sweep(near).tasks
    grid, with_reach = plan_sweep(far).tasks, plan_with_reach(far).tasks
    extra = [t.json_metadata for t in with_reach if t.json_metadata["d"] not in (3, 5)]
    assert len(with_reach) == len(grid) + 8 and {m["d"] for m in extra} == {7, 9}
    # largest circuits first
    sizes = [t.json_metadata["d"] * t.json_metadata["rounds"] for t in with_reach]
    assert sizes == sorted(sizes, reverse=True)


@pytest.mark.parametrize("value", ['"always"', "[4]", "[1]", "9", "[true]"])
def test_bad_reach_distances_name_the_field(value):
    with pytest.raises(InputError) as exc:
        tiny(value)
    assert "reach_distances" in str(exc.value)
