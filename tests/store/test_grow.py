"""Growing a sweep: a changed grid keeps every sample of the tasks that did not change and
samples only the new ones; a changed device (or circuit) is still refused, naming what changed."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.store.manifest import Manifest, TaskEntry, grow, read_manifest

runner = CliRunner()

TARGET = """
[device]
name = "tiny invented chip"
[device.preset]
model = "sd6"
p = {p}
[goal]
logical_error_per_cycle = 1e-6
[sweep]
code = "repetition"
distances = {distances}
joint_scales = {scales}
round_multiples = {rounds}
"""


def _write(path: Path, *, p: float = 0.03, distances: str = "[3, 5]", scales: str = "[1.0]",
           rounds: str = "[1]") -> None:
    path.write_text(TARGET.format(p=p, distances=distances, scales=scales, rounds=rounds))


def _sweep(target: Path, out: Path) -> str:
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.stderr
    return res.stderr



@pytest.mark.slow
def test_a_grown_sweep_keeps_old_samples_and_samples_only_new_tasks(tmp_path: Path) -> None:
    target, out = tmp_path / "tiny.toml", tmp_path / "out"
    _write(target)
    _sweep(target, out)
    before = {s.strong_id: (s.shots, s.errors) for s in _stats(out)}
    assert len(before) == 2

    # add a distance and a joint scale point: 2 old tasks keep their counts, 4 new are sampled
    _write(target, distances="[3, 5, 7]", scales="[0.7, 1.0]")
    said = _sweep(target, out)
    assert "2 task(s) keep their samples, 4 new task(s) to sample" in said
    after = {s.strong_id: (s.shots, s.errors) for s in _stats(out)}
    assert len(after) == 6
    assert {k: after[k] for k in before} == before  # counts unchanged: nothing lost, nothing doubled

    # take the distance out again: its samples stay on disk, unread; put it back: nothing to sample
    _write(target, distances="[3, 5]", scales="[0.7, 1.0]")
    said = _sweep(target, out)
    assert "2 task(s) no longer in the sweep" in said
    assert len(_stats(out)) == 4
    assert len(read_manifest(out).retired) == 2
    _write(target, distances="[3, 5, 7]", scales="[0.7, 1.0]")
    said = _sweep(target, out)
    assert "6 task(s) keep their samples, 0 new" in said and "nothing to sample" in said
    assert {s.strong_id: (s.shots, s.errors) for s in _stats(out)} == after

    # a round count added (r = 3d beside r = d): the 6 tasks keep their counts, 6 more are sampled
    said = _sweep_with(target, out, distances="[3, 5, 7]", scales="[0.7, 1.0]", rounds="[1, 3]")
    assert "6 task(s) keep their samples, 6 new task(s) to sample" in said
    assert {k: v for k, v in ((s.strong_id, (s.shots, s.errors)) for s in _stats(out)) if k in after} == after

    # the device is another matter: refused, naming the key and both values
    _write(target, p=0.031, distances="[3, 5, 7]", scales="[0.7, 1.0]")
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 2
    assert "the device changed: device.preset.p 0.03 vs 0.031" in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1


def _sweep_with(target: Path, out: Path, **kw: str) -> str:
    _write(target, **kw)
    return _sweep(target, out)


def _stats(out: Path) -> list:
    from planner.store import SampleStore

    return SampleStore(out, notify=None).stats()


def _entry(sid: str, d: int) -> TaskEntry:
    return TaskEntry(strong_id=sid, decoder="pymatching", json_metadata={"d": d, "axis": "joint"})


def test_same_settings_with_another_circuit_is_refused() -> None:
    """A task whose metadata is unchanged but whose circuit (strong id) is not: the noise
    placement or a library changed, so none of the samples describe the new circuits."""
    old = Manifest(target_sha256="a", target_name="t", versions={}, tasks=(_entry("x", 3),), device={})
    refused = grow(old, dataclasses.replace(old, tasks=(_entry("y", 3),)))
    assert isinstance(refused, str) and "another circuit" in refused


def test_a_retired_task_added_back_counts_as_kept() -> None:
    old = Manifest(target_sha256="a", target_name="t", versions={}, device={},
                   tasks=(_entry("x", 3),), retired=(_entry("z", 5),))
    new, growth = grow(old, dataclasses.replace(old, tasks=(_entry("x", 3), _entry("z", 5)), retired=()))
    assert (growth.kept, growth.added, growth.retired) == (2, 0, 0)
    assert new.retired == ()


def test_manifest_round_trips_device_and_retired(tmp_path: Path) -> None:
    m = Manifest(target_sha256="a", target_name="t", versions={"stim": "1"}, device={"code": "surface"},
                 tasks=(_entry("x", 3),), retired=(_entry("z", 5),))
    doc = json.loads(json.dumps(m.to_json()))
    assert Manifest.from_json(doc, source="m.json") == m


@pytest.mark.slow
def test_an_older_directory_grows_with_the_device_of_its_target_copy(tmp_path: Path) -> None:
    """A manifest written before the device identity was recorded: the identity comes from the
    directory's target copy, so its sweep can grow as well (and a device change is still named)."""
    target, out = tmp_path / "tiny.toml", tmp_path / "out"
    _write(target)
    _sweep(target, out)
    doc = json.loads((out / "manifest.json").read_text())
    doc.pop("device")
    (out / "manifest.json").write_text(json.dumps(doc))
    _write(target, distances="[3, 5, 7]")
    assert "2 task(s) keep their samples, 1 new task(s) to sample" in _sweep(target, out)
    assert len(_stats(out)) == 3
    _write(target, p=0.031, distances="[3, 5, 7]")
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 2 and "device.preset.p 0.03 vs 0.031" in res.stderr
