"""Wall time of ``answer_all`` (fits, response model, 200 bootstrap replicas, roadmap with rate
spreads, sensitivity) on a demo-sized synthetic grid: 15 scale points x 3 distances x 2 bases.

The goal: under 2 s on one core of a 2-core machine (measured 0.55 s when unloaded). This used
to be an assertion in tests/test_planning_roadmap.py; a timing belongs here, where a loaded
machine makes a slow number to read rather than a red test suite.

Run:  .venv/bin/python bench/roadmap_speed.py [--rounds 5]
Prints each round's time, then ``median=X s min=Y s max=Z s target=2.0 s met=yes|no``.
The exit code is 0 either way (a benchmark reports, it does not judge a loaded machine).
"""

from __future__ import annotations

import argparse
import statistics
import time

from planner.config import EXAMPLE_TOML, parse_target
from planner.planning import answer_all
from planner.planning.synthetic import synthetic_stats

TARGET_SECONDS = 2.0

# invented weights of 1/Lambda per component (the same as the unit tests' synthetic device)
WEIGHTS = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1,
           "idle_measure": 0.05}

ROADMAP = """
[roadmap]
start = 2030-01-01
horizon_years = 12
step = "year"
milestones = [2.0, 4.0]
[roadmap.rates]
gate_2q = {per_year = 0.2, spread = 0.05}
readout = {halving_years = 3.0}
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rounds", type=int, default=5, help="timed calls (after one warm-up)")
    args = parser.parse_args()
    stats = synthetic_stats(weights=WEIGHTS, prefactor=0.1, distances=(3, 5, 7),
                            joint_scales=(0.5, 0.7, 1.0), component_scales=(0.3, 0.6),
                            shots=100_000, seed=2)
    target = parse_target(EXAMPLE_TOML + ROADMAP)
    answer_all(target, stats, seed=1)  # warm-up: imports, caches
    times = []
    for r in range(max(args.rounds, 1)):
        t0 = time.perf_counter()
        answer_all(target, stats, seed=1)
        times.append(time.perf_counter() - t0)
        print(f"round {r + 1}: {times[-1]:.3f} s", flush=True)
    med = statistics.median(times)
    print(f"median={med:.3f} s min={min(times):.3f} s max={max(times):.3f} s "
          f"target={TARGET_SECONDS} s met={'yes' if med < TARGET_SECONDS else 'no'}")


if __name__ == "__main__":
    main()
