"""Throughput of planner's engines against plain ``sinter.collect`` on the same tasks.

Each round runs every engine once, in an order that rotates from round to round (so a slow
spell of a shared machine does not always hit the same engine):

- ``sinter``: ``sinter.collect`` on N workers (the reference; starts its workers every time);
- ``dask warm``: planner's dask engine on one ``local:N`` cluster started before the first
  round and reused (what a long sweep sees once the cluster runs);
- ``dask cold``: planner's dask engine with ``--cluster local:N`` (starts and closes its cluster
  in the round, as a short sweep would);
- ``local``: planner's local engine (sinter underneath, plus a store row per batch).

Wall time is end to end. Printed per engine: shots per second min / median / max over the rounds
and the spread (max - min) / median; per planner engine the ratio to sinter *of the same round*
(paired, so machine drift between rounds cancels) min / median / max, and a verdict against the
target (>= 0.95): "meets" when every round's ratio is at least the target, "below" when every
round's is under it, else "undecided" (the spread straddles the target: run more rounds, or on a
quieter machine).

    .venv/bin/python bench/throughput.py                       # 5 rounds, ~7 minutes on 2 cores
    .venv/bin/python bench/throughput.py --rounds 2 --shots 200000 --engines sinter,dask-warm
"""

from __future__ import annotations

import argparse
import logging
import statistics
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import sinter
import stim
from rich.console import Console

from planner.sampling import run_sweep
from planner.store import SampleStore
from planner.sweep import StoppingRule

# per task, both tasks shots-limited: ~10 s per engine and round on 2 cores, so the one-off start
# of a LocalCluster (~1 s) weighs as it would in a short sweep, not as in a 3 s toy run
SHOTS = 2_000_000
TARGET = 0.95
ENGINES = ("sinter", "dask-warm", "dask-cold", "local")


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


def verdict(ratios: list[float], target: float = TARGET) -> str:
    """"meets" / "below" / "undecided" for paired ratios against ``target``.

    >>> verdict([0.97, 1.01]), verdict([0.90, 0.93]), verdict([0.93, 0.99])
    ('meets', 'below', 'undecided')
    """
    if min(ratios) >= target:
        return "meets"
    if max(ratios) < target:
        return "below"
    return "undecided"


def summary_line(name: str, values: list[float], unit: str = "") -> str:
    med = statistics.median(values)
    spread = (max(values) - min(values)) / med if med else float("nan")
    return (f"{name:<22} min {min(values):>12,.3f}  median {med:>12,.3f}  max {max(values):>12,.3f}"
            f"  spread {100 * spread:5.1f}%{unit}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--shots", type=int, default=SHOTS, help="shots per task per run")
    ap.add_argument("--engines", default=",".join(ENGINES),
                    help=f"comma-separated subset of {', '.join(ENGINES)} (sinter is always run)")
    args = ap.parse_args()
    chosen = ["sinter"] + [e for e in args.engines.split(",") if e in ENGINES and e != "sinter"]
    tasks = bench_tasks()
    rates: dict[str, list[float]] = {e: [] for e in chosen}
    ratios: dict[str, list[float]] = {e: [] for e in chosen if e != "sinter"}
    warm = None
    if "dask-warm" in chosen:
        from distributed import LocalCluster

        warm = LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                            dashboard_address=":0", silence_logs=logging.CRITICAL,
                            preload=["planner.sampling.orphans"])
        # one throw-away run, so worker imports and decoder start-up are not in round 1
        run_planner(tasks, workers=args.workers, shots=min(args.shots, 20_000),
                    cluster=warm.scheduler_address)
    runners: dict[str, Callable[[], tuple[int, float]]] = {
        "sinter": lambda: run_sinter(tasks, workers=args.workers, shots=args.shots),
        "dask-warm": lambda: run_planner(tasks, workers=args.workers, shots=args.shots,
                                         cluster=warm.scheduler_address if warm else None),
        "dask-cold": lambda: run_planner(tasks, workers=args.workers, shots=args.shots,
                                         cluster=f"local:{args.workers}"),
        "local": lambda: run_planner(tasks, workers=args.workers, shots=args.shots, cluster=None),
    }
    try:
        for k in range(args.rounds):
            order = chosen[k % len(chosen):] + chosen[: k % len(chosen)]
            now: dict[str, float] = {}
            for engine in order:
                n, s = runners[engine]()
                now[engine] = n / s
                rates[engine].append(n / s)
            for engine in ratios:
                ratios[engine].append(now[engine] / now["sinter"])
            print(f"round {k + 1} ({' -> '.join(order)}): "
                  + "; ".join(f"{e} {now[e]:,.0f} shots/s" for e in chosen), flush=True)
    finally:
        if warm is not None:
            warm.close()
    print(f"\nshots per second over {args.rounds} rounds ({args.workers} workers, "
          f"{args.shots:,} shots per task):")
    for engine, values in rates.items():
        print(summary_line(engine, values))
    print(f"\nplanner / sinter throughput, paired by round (target >= {TARGET}):")
    for engine, values in ratios.items():
        print(summary_line(engine, values) + f"  -> {verdict(values)}")


if __name__ == "__main__":
    main()
