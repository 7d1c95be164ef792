"""SIGKILL a sweep at random moments, resume to completion: no finished chunk lost, none counted
twice, totals equal the sum of the rows and meet the stopping rule."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import sinter

from planner.store import SampleStore

pytestmark = pytest.mark.slow  # every test here samples with sinter

MAX_SHOTS = 1_500_000

CHILD = f'''
import sys
import sinter, stim
from rich.console import Console
from planner.sampling import run_sweep
from planner.store import SampleStore
from planner.sweep import StoppingRule

def task(d, p):
    c = stim.Circuit.generated("surface_code:rotated_memory_z", distance=d, rounds=d,
                               after_clifford_depolarization=p, before_measure_flip_probability=p)
    meta = {{"code": "surface", "d": d, "basis": "z", "rounds": d, "axis": "joint", "factor": p,
            "scales": {{}}}}
    return sinter.Task(circuit=c, decoder="pymatching", json_metadata=meta)

if __name__ == "__main__":
    tasks = [task(3, 0.004), task(5, 0.004), task(5, 0.002)]
    run_sweep(tasks, store=SampleStore(sys.argv[1]), workers=2, console=Console(stderr=True, quiet=True),
              rule=StoppingRule(max_errors=10**9, max_shots={MAX_SHOTS}))
'''


def _full_rows(store: SampleStore) -> list[tuple[str, str]]:
    """(chunk id, raw line) of every complete line in every shard, duplicates kept."""
    out = []
    for shard in store.shard_files():
        data = shard.read_bytes()
        for line in data[: data.rfind(b"\n") + 1].decode().splitlines()[1:]:
            out.append((line.rsplit(",", 1)[1], line))
    return out


def _safe_stats(store: SampleStore) -> list[sinter.TaskStats]:
    try:
        return store.stats()
    except FileNotFoundError:  # the shard directory appears with the first writer
        return []


def test_sigkill_at_random_moments_then_resume(tmp_path: Path) -> None:
    script = tmp_path / "child.py"
    script.write_text(CHILD)
    out = tmp_path / "out"
    store = SampleStore(out)
    rng = random.Random(20240611)
    survived: set[str] = set()
    kills = 0
    # kill when a random share of the work is on disk (robust to machine speed), plus a random
    # few milliseconds so the kill lands anywhere in a batch or a write
    for low, high in ((0.05, 0.25), (0.35, 0.55), (0.65, 0.85)):
        goal = rng.uniform(low, high) * 3 * MAX_SHOTS
        proc = subprocess.Popen([sys.executable, str(script), str(out)], start_new_session=True)
        while proc.poll() is None and sum(s.shots for s in _safe_stats(store)) < goal:
            time.sleep(0.01)
        time.sleep(rng.uniform(0.0, 0.05))
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)  # the sweep and its sinter workers, mid-flight
            kills += 1
        proc.wait()
        survived |= {chunk for chunk, _ in _full_rows(store)}
    assert kills == 3, "a run finished before its kill: make the sweep longer"
    done = subprocess.run([sys.executable, str(script), str(out)], timeout=120)
    assert done.returncode == 0
    rows = _full_rows(store)
    ids = [chunk for chunk, _ in rows]
    assert survived <= set(ids)  # every row fully written before a kill is still there
    assert len(ids) == len(set(ids))  # no chunk written twice
    stats = store.stats()
    assert len(stats) == 3
    for s in stats:
        assert s.shots == MAX_SHOTS  # the rule is met exactly: sinter caps each run at what is left ...
        by_rows = [r.stats for r in store.rows() if r.stats.strong_id == s.strong_id]
        assert s.shots == sum(r.shots for r in by_rows)  # ... and totals are the rows' sum
        assert s.errors == sum(r.errors for r in by_rows)
    # after the resume repaired torn tails, sinter's own reader sees the same totals
    theirs = {s.strong_id: (s.shots, s.errors) for s in sinter.read_stats_from_csv_files(*store.shard_files())}
    assert theirs == {s.strong_id: (s.shots, s.errors) for s in stats}
