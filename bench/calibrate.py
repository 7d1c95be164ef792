"""Speed and memory of the calibration's analysis: 1M shots of d = 7, 7-round detection data
(read, detection and pair statistics, exact model expectation, the excess fit with its bootstrap,
the bad-qubit search). Target: under 60 s on 2 cores, peak memory under 2 GB.

The data is sampled first (not timed) from targets/hidden_device.toml with one bad qubit, into
a temporary b8 file, by stim's streaming writer. Decoding the measured events and sampling the
staged comparison are not part of this figure (they are sampling, with their own budgets).

    .venv/bin/python bench/calibrate.py                     # 1M shots, d=7, 7 rounds
    .venv/bin/python bench/calibrate.py --shots 200000 --distance 5
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

from planner.circuits import build_memory_circuit
from planner.config import load_target
from planner.devicedata import (
    DEFAULT_COMPONENTS,
    count_events,
    dem_of,
    expectation,
    fit_excess,
    layout_of,
    measure,
    read_events,
    with_excess,
)
from planner.devicedata.fit import STEP
from planner.jobs.calibrate import sample_events
from planner.noise import NoiseModel

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=1_000_000)
    ap.add_argument("--distance", type=int, default=7)
    ap.add_argument("--rounds", type=int, default=None)
    args = ap.parse_args()
    d, r = args.distance, args.rounds or args.distance
    with tempfile.TemporaryDirectory() as tmp:
        events = Path(tmp) / "events.b8"
        t0 = time.perf_counter()
        sample_events(load_target(ROOT / "targets/hidden_device.toml"), distance=d, rounds=r, basis="z",
                      shots=args.shots, out=events, seed=7, inject=[((3.0, 3.0), 0.004)])
        print(f"sampled {args.shots} shots of d={d}, {r} rounds in {time.perf_counter() - t0:.1f} s (not timed)")
        before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        target = load_target(ROOT / "targets/demo.toml")
        base = NoiseModel.from_target(target)

        def build(m: NoiseModel):  # noqa: ANN202
            return build_memory_circuit(m, code="surface", distance=d, rounds=r, basis="z")

        times = {}
        t = time.perf_counter()
        circuit = build(base)
        ev = read_events(events, num_detectors=circuit.num_detectors, num_observables=1)
        times["read"] = time.perf_counter() - t
        t = time.perf_counter()
        counts = count_events(ev)
        pairs = counts.pair_matrix()
        times["detection and pair statistics"] = time.perf_counter() - t
        t = time.perf_counter()
        first = expectation(dem_of(circuit))
        union = expectation(dem_of(build(with_excess(base, {c: STEP for c in DEFAULT_COMPONENTS})))).connected
        measured = measure(counts, union | first.connected)
        times["model expectation and measured quantities"] = time.perf_counter() - t
        t = time.perf_counter()
        fit = fit_excess(measured, base, build, layout=layout_of(circuit, basis="z"))
        times["fit (bootstrap, bad-qubit search)"] = time.perf_counter() - t
        total = sum(times.values())
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"{ev.num_shots} shots x {ev.num_detectors} detectors, {measured.value.size} quantities, "
          f"{pairs.size} pair probabilities")
    for name, s in times.items():
        print(f"  {name:45s} {s:6.1f} s")
    print(f"analysis: {total:.1f} s (target < 60 s); peak memory {peak:.0f} MB (target < 2048 MB; "
          f"{before:.0f} MB before the analysis)")
    for c in fit.components:
        print(f"  {c.name:13s} excess {c.best:.3g} [{c.low:.3g}, {c.high:.3g}]")
    for q in fit.qubits:
        print(f"  outlier qubit {q.qubit}: {q.sigma:.0f} sigma")


if __name__ == "__main__":
    main()
