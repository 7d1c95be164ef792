"""The dask engine: address parsing, correct counts (exact formula with intervals), the stopping
rule across workers, and a worker killed mid-run."""

from __future__ import annotations

import logging
import math
import os
import signal
import threading
import time
from pathlib import Path

import pytest
import sinter
import stim
from rich.console import Console

from planner.sampling.chunks import _Progress, parse_cluster, sample_chunk
from planner.errors import InputError
from planner.sweep import resolved_task
from planner.sampling import WorkItem, run_sweep
from planner.store import SampleStore
from planner.sweep import StoppingRule

P_FLIP = 0.05
WIDE = 1e4  # likelihood factor of the rate checks: about 4.3 sigma


def rep_task(*, d: int) -> sinter.Task:
    """Repetition code, one round: data flips with probability P_FLIP, perfect measurement."""
    circuit = stim.Circuit.generated("repetition_code:memory", distance=d, rounds=1,
                                     before_round_data_depolarization=1.5 * P_FLIP)
    meta = {"code": "repetition", "d": d, "basis": "z", "rounds": 1, "axis": "joint",
            "factor": P_FLIP, "scales": {}}
    return sinter.Task(circuit=circuit, decoder="pymatching", json_metadata=meta)


def majority_vote_failure(d: int, p: float) -> float:
    # Ekert et al., Introduction to Quantum Information Science, sec. 11.7
    return sum(math.comb(d, k) * p**k * (1 - p) ** (d - k) for k in range((d + 1) // 2, d + 1))


def quiet() -> Console:
    return Console(stderr=True, quiet=True)


def test_parse_cluster() -> None:
    assert parse_cluster("local:3").local_workers == 3
    assert parse_cluster("tcp://10.1.2.3:8786").address == "tcp://10.1.2.3:8786"
    assert parse_cluster("node07:8786").address == "node07:8786"
    for bad in ("local", "local:0", "local:x", "http//x", "tcp://host", ""):
        with pytest.raises(InputError, match="--cluster"):
            parse_cluster(bad)


def test_worker_function_counts_like_the_formula() -> None:
    task = resolved_task(rep_task(d=3))
    res = sample_chunk(chunk_id="c1", strong_id=task.strong_id(), circuit_text=str(task.circuit),
                       decoder="pymatching", shots=100_000)
    assert res.shots == 100_000 and res.chunk_id == "c1" and res.seconds > 0
    fit = sinter.fit_binomial(num_shots=res.shots, num_hits=res.errors, max_likelihood_factor=WIDE)
    # Ekert et al., Introduction to Quantum Information Science, sec. 11.7 (majority vote)
    assert fit.low <= majority_vote_failure(3, P_FLIP) <= fit.high


def test_chunks_grow_from_measured_time_and_respect_budgets() -> None:
    task = resolved_task(rep_task(d=3))
    item = WorkItem(task=task, strong_id=task.strong_id(), shots_left=1_000_000, errors_left=1_000)
    tp = _Progress(item=item, text="")
    assert tp.next_chunk_shots() == 200  # first chunk: small
    tp.shots, tp.errors, tp.seconds, tp.chunks = 200, 0, 0.001, 1
    assert tp.next_chunk_shots() == 400  # grows at most 2x per measurement
    tp.shots, tp.errors, tp.seconds, tp.chunks = 100_000, 500, 0.5, 5
    # 500 errors left at 0.5% per shot: about 100k shots more, +10%
    assert tp.next_chunk_shots() == pytest.approx(110_000, rel=0.01)
    tp.in_flight["x"] = 90_000
    assert tp.next_chunk_shots() == 11_001  # in-flight shots are counted against the need
    tp.in_flight["x"] = 100_000
    assert tp.next_chunk_shots() == 0  # those in flight should suffice: wait for them
    tp.errors = 1_000
    assert tp.next_chunk_shots() == 0


@pytest.mark.slow
def test_local_cluster_sweep_counts_exactly(tmp_path: Path) -> None:
    tasks = [rep_task(d=3), rep_task(d=5)]
    store = SampleStore(tmp_path)
    rule = StoppingRule(max_errors=10**9, max_shots=150_000)
    s = run_sweep(tasks, store=store, rule=rule, cluster="local:2", console=quiet())
    assert s.complete and s.new_shots == 300_000
    for st in store.stats():
        assert st.shots == 150_000  # chunks never claim more than the shots left
        fit = sinter.fit_binomial(num_shots=st.shots, num_hits=st.errors, max_likelihood_factor=WIDE)
        # Ekert et al. sec. 11.7 (majority vote; MWPM equals it here)
        assert fit.low <= majority_vote_failure(st.json_metadata["d"], P_FLIP) <= fit.high
    assert {st.strong_id for st in store.stats()} == {resolved_task(t).strong_id() for t in tasks}
    assert run_sweep(tasks, store=store, rule=rule, cluster="local:2", console=quiet()).new_shots == 0


def _slow_task() -> sinter.Task:
    circuit = stim.Circuit.generated("surface_code:rotated_memory_z", distance=5, rounds=5,
                                     after_clifford_depolarization=0.004,
                                     before_measure_flip_probability=0.004,
                                     after_reset_flip_probability=0.004)
    meta = {"code": "surface", "d": 5, "basis": "z", "rounds": 5, "axis": "joint", "factor": 1.0,
            "scales": {}}
    return sinter.Task(circuit=circuit, decoder="pymatching", json_metadata=meta)


@pytest.mark.slow
def test_killed_worker_chunk_is_rerun_and_counted_once(tmp_path: Path) -> None:
    from distributed import Client, LocalCluster

    store = SampleStore(tmp_path)
    rule = StoppingRule(max_errors=10**9, max_shots=400_000)
    killed: list[int] = []
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                      silence_logs=logging.CRITICAL) as cluster, Client(cluster) as client:
        pids = list(client.run(os.getpid).values())

        def kill_one() -> None:
            # wait until chunks are flowing (rows on disk), then kill a worker mid-chunk
            deadline = time.monotonic() + 20
            while time.monotonic() < deadline and len(list(store.rows())) < 3:
                time.sleep(0.05)
            os.kill(pids[0], signal.SIGKILL)
            killed.append(pids[0])

        killer = threading.Thread(target=kill_one)
        killer.start()
        s = run_sweep([_slow_task()], store=store, rule=rule, cluster=cluster.scheduler_address,
                      console=quiet())
        killer.join()
    assert killed, "the worker was not killed"
    rows = list(store.rows())
    raw_lines = sum(len(p.read_text().splitlines()) - 1 for p in store.shard_files())
    assert raw_lines == len(rows)  # no chunk id written twice
    (st,) = store.stats()
    assert st.shots == sum(r.stats.shots for r in rows) == s.new_shots == 400_000
