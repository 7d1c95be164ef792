"""Throughput of planner's engines against plain ``sinter.collect`` on the same tasks.

Runs, alternating, for each round: sinter.collect on 2 workers, planner's dask engine on
``local:2``, and planner's local engine (sinter underneath, plus a store row per batch). Wall
time is end to end (worker start-up included), as a user sees it. Prints the ratio of
planner / sinter throughput (shots per second) as min / median / max over the rounds.

    .venv/bin/python bench/throughput.py            # 3 rounds, ~2.5 minutes on 2 cores
    .venv/bin/python bench/throughput.py --shots 200000  # shorter, noisier
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import sinter
import stim
from rich.console import Console

from planner.sampling import run_sweep
from planner.store import SampleStore
from planner.sweep import StoppingRule


# per task, both tasks shots-limited: ~15 s per engine and round on 2 cores, so the one-off start
# of a LocalCluster (~0.6 s) weighs as it would in a short sweep, not as in a 3 s toy run
SHOTS = 4_000_000


def bench_tasks() -> list[sinter.Task]:
    """A d=5 and a d=7 rotated memory at p = 0.4% (well below threshold: shots-limited)."""
    out = []
    for d in (5, 7):
        circuit = stim.Circuit.generated("surface_code:rotated_memory_z", distance=d, rounds=d,
                                         after_clifford_depolarization=0.004,
                                         before_round_data_depolarization=0.004,
                                         before_measure_flip_probability=0.004,
                                         after_reset_flip_probability=0.004)
        meta = {"code": "surface", "d": d, "basis": "z", "rounds": d, "axis": "joint",
                "factor": 1.0, "scales": {}}
        out.append(sinter.Task(circuit=circuit, decoder="pymatching", json_metadata=meta))
    return out


def run_sinter(tasks: list[sinter.Task], *, workers: int, shots: int) -> tuple[int, float]:
    t0 = time.monotonic()
    stats = sinter.collect(num_workers=workers, tasks=tasks, max_shots=shots)
    return sum(s.shots for s in stats), time.monotonic() - t0


def run_planner(tasks: list[sinter.Task], *, workers: int, shots: int,
                cluster: str | None) -> tuple[int, float]:
    t0 = time.monotonic()
    with tempfile.TemporaryDirectory() as tmp:
        summary = run_sweep(tasks, store=SampleStore(Path(tmp)),
                            rule=StoppingRule(max_errors=10**12, max_shots=shots),
                            workers=None if cluster else workers, cluster=cluster,
                            console=Console(stderr=True, quiet=True))
    return summary.new_shots, time.monotonic() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--shots", type=int, default=SHOTS, help="shots per task per run")
    args = ap.parse_args()
    tasks = bench_tasks()
    ratios: dict[str, list[float]] = {"dask local:N": [], "local engine": []}
    for k in range(args.rounds):
        n, s = run_sinter(tasks, workers=args.workers, shots=args.shots)
        base = n / s
        n_d, s_d = run_planner(tasks, workers=args.workers, shots=args.shots,
                               cluster=f"local:{args.workers}")
        n_l, s_l = run_planner(tasks, workers=args.workers, shots=args.shots, cluster=None)
        ratios["dask local:N"].append((n_d / s_d) / base)
        ratios["local engine"].append((n_l / s_l) / base)
        print(f"round {k + 1}: sinter {base:,.0f} shots/s ({s:.1f} s); dask {n_d / s_d:,.0f} "
              f"shots/s ({s_d:.1f} s); local {n_l / s_l:,.0f} shots/s ({s_l:.1f} s)", flush=True)
    for name, r in ratios.items():
        print(f"planner/sinter throughput, {name}: min {min(r):.3f}  median "
              f"{statistics.median(r):.3f}  max {max(r):.3f}  (target >= 0.95)")


if __name__ == "__main__":
    main()
