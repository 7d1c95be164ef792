"""Shots per second of the leakage sampler against the Pauli path (stim's compiled sampler +
pymatching) at d = 3, 5, 7 (rounds = d, basis z) on the demo device with leakage on
(targets/demo_leakage.toml), one process each, sampling and decoding both timed.

Each (distance, path) is timed for ``--seconds`` per repeat, paths alternating, ``--repeats``
times; printed: median shots per second of each path and the slowdown (Pauli / leakage, the
median of the paired repeats). The last line is ``leakage_slowdown_d7=X`` (target X <= 10).

    .venv/bin/python bench/leakage.py                  # ~1 minute
    .venv/bin/python bench/leakage.py --seconds 5 --repeats 5
"""

from __future__ import annotations

import argparse
import statistics
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import sinter

from planner.config import load_target
from planner.sampling.leakage import CompiledLeakageSampler
from planner.sweep import resolved_task, tasks_for_scales

TARGET = Path(__file__).resolve().parents[1] / "targets" / "demo_leakage.toml"
SHOTS = 4096  # per call, both paths


def leakage_path(task: sinter.Task) -> Callable[[], int]:
    sampler = CompiledLeakageSampler(task)

    def run() -> int:
        return sampler.sample(SHOTS).shots

    return run


def pauli_path(task: sinter.Task) -> Callable[[], int]:
    sampler = task.circuit.compile_detector_sampler()
    decoder = sinter.BUILT_IN_DECODERS["pymatching"].compile_decoder_for_dem(dem=task.detector_error_model)

    def run() -> int:
        dets, obs = sampler.sample(shots=SHOTS, bit_packed=True, separate_observables=True)
        predictions = decoder.decode_shots_bit_packed(bit_packed_detection_event_data=dets)
        np.count_nonzero(np.any(predictions[:, : obs.shape[1]] != obs, axis=1))
        return SHOTS

    return run


def rate(run: Callable[[], int], seconds: float) -> float:
    run()  # warm up (buffers, first decode)
    shots, t0 = 0, time.perf_counter()
    while time.perf_counter() - t0 < seconds:
        shots += run()
    return shots / (time.perf_counter() - t0)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=3.0, help="timing window per path and repeat")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--distances", default="3,5,7")
    args = ap.parse_args()
    target = load_target(TARGET)
    slowdown: dict[int, float] = {}
    for d in (int(x) for x in args.distances.split(",")):
        task = tasks_for_scales(target, {}, distances=[d], label="bench")[0]
        task = resolved_task(task)
        if task.json_metadata.get("basis") != "z":
            task = resolved_task(tasks_for_scales(target, {}, distances=[d], label="bench")[1])
        leak, pauli = leakage_path(task), pauli_path(task)
        rl, rp, ratio = [], [], []
        for _ in range(args.repeats):
            a, b = rate(pauli, args.seconds), rate(leak, args.seconds)
            rp.append(a)
            rl.append(b)
            ratio.append(a / b)
        slowdown[d] = statistics.median(ratio)
        print(f"d={d} rounds={d}: pauli {statistics.median(rp):>10,.0f} shots/s   leakage "
              f"{statistics.median(rl):>10,.0f} shots/s   slowdown {slowdown[d]:.2f}x "
              f"(repeats {', '.join(f'{r:.2f}' for r in ratio)})", flush=True)
    last = max(slowdown)
    print(f"leakage_slowdown_d{last}={slowdown[last]:.2f}")


if __name__ == "__main__":
    main()
