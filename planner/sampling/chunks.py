"""The dask engine's work: tasks cut into chunks sized by measured time, run on a dask cluster.

Each chunk carries the circuit text (not a detector error model, not a scattered future): a
worker compiles sampler and decoder once per circuit and keeps the last few. The chunk id is
fixed when a chunk is submitted, so a chunk that dask reruns after losing a worker is still
written, and counted, once.
"""

from __future__ import annotations

import collections
import dataclasses
import math
import threading
import time
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import sinter
import stim

from planner.sampling.dask import (
    ClusterSpec,
    WorkerWatch,
    connect,
    parse_cluster,
    worker_timeout,
)
from planner.sampling.leakage import leakage_of, sample_leakage_chunk
from planner.sampling.work import ChunkSink, WorkItem, new_chunk_id
from planner.sweep import StoppingRule, detector_error_model_for

if TYPE_CHECKING:
    from rich.console import Console

FIRST_CHUNK_SHOTS = 200  # before anything is measured: small, so the first timing comes fast
FIRST_CHUNK_S = 1.0  # target seconds of work per chunk, doubling per finished chunk of a task ...
MAX_CHUNK_S = 16.0  # ... up to this
IN_FLIGHT_PER_WORKER = 2
TAIL_SHARES = 4  # a chunk holds at most 1/(4 x workers) of the work left ...
MIN_TAIL_CHUNK_S = 0.25  # ... but not less than this
CACHE_CIRCUITS = 8
RESUBMITS = 3  # a chunk whose workers all died (KilledWorker) is resubmitted, same chunk id

# ---------------------------------------------------------------------------------------------
# worker side


@dataclasses.dataclass(frozen=True)
class ChunkResult:
    chunk_id: str
    shots: int
    errors: int
    discards: int
    seconds: float


_cache: collections.OrderedDict[tuple[str, str], tuple[Any, Any]] = collections.OrderedDict()
_cache_lock = threading.Lock()


def _compiled(strong_id: str, circuit_text: str, decoder: str) -> tuple[Any, Any]:
    key = (strong_id, decoder)
    with _cache_lock:
        hit = _cache.get(key)
        if hit is not None:
            _cache.move_to_end(key)
            return hit
    circuit = stim.Circuit(circuit_text)
    dem = detector_error_model_for(circuit)
    compiled = (circuit.compile_detector_sampler(),
                sinter.BUILT_IN_DECODERS[decoder].compile_decoder_for_dem(dem=dem))
    with _cache_lock:
        _cache[key] = compiled
        while len(_cache) > CACHE_CIRCUITS:
            _cache.popitem(last=False)
    return compiled


def sample_chunk(*, chunk_id: str, strong_id: str, circuit_text: str, decoder: str,
                 shots: int, leakage: dict[str, Any] | None = None) -> ChunkResult:
    """Runs on a worker: sample ``shots`` shots, decode, count wrong observable predictions.

    ``seconds`` is the time spent sampling and decoding (compiling is not counted, as in sinter).
    """
    if leakage is not None:  # a leakage task: its own sampler (planner.sampling.leakage)
        done, errors, seconds = sample_leakage_chunk(strong_id=strong_id, circuit_text=circuit_text,
                                                     decoder=decoder, shots=shots, leakage=leakage)
        return ChunkResult(chunk_id=chunk_id, shots=done, errors=errors, discards=0, seconds=seconds)
    sampler, compiled_decoder = _compiled(strong_id, circuit_text, decoder)
    t0 = time.monotonic()
    dets, obs = sampler.sample(shots=shots, bit_packed=True, separate_observables=True)
    predictions = compiled_decoder.decode_shots_bit_packed(bit_packed_detection_event_data=dets)
    errors = int(np.count_nonzero(np.any(predictions[:, : obs.shape[1]] != obs, axis=1)))
    return ChunkResult(chunk_id=chunk_id, shots=int(shots), errors=errors, discards=0,
                       seconds=time.monotonic() - t0)


# ---------------------------------------------------------------------------------------------
# client side


@dataclasses.dataclass
class _Progress:
    """Mutable bookkeeping for one task on the client."""

    item: WorkItem
    text: str
    shots: int = 0
    errors: int = 0
    seconds: float = 0.0
    chunks: int = 0
    in_flight: dict[str, int] = dataclasses.field(default_factory=dict)  # chunk id -> shots

    @property
    def met(self) -> bool:
        return self.shots >= self.item.shots_left or self.errors >= self.item.errors_left

    def unclaimed_seconds(self) -> float:
        """Estimated seconds of work not yet submitted (0 before anything is measured)."""
        if self.met or self.shots == 0 or self.seconds <= 0:
            return 0.0
        unclaimed = self.item.shots_left - self.shots - sum(self.in_flight.values())
        return max(unclaimed, 0) * self.seconds / self.shots

    def next_chunk_shots(self, cap_seconds: float = math.inf) -> int:
        """Shots for the next chunk (0: nothing more to submit), at most ``cap_seconds`` of work
        (the caller shrinks it as the sweep nears its end, so the last chunks are small and no
        worker idles while one long chunk finishes)."""
        if self.met:
            return 0
        unclaimed = self.item.shots_left - self.shots - sum(self.in_flight.values())
        if unclaimed <= 0:
            return 0
        if self.shots == 0 or self.seconds <= 0:
            want = FIRST_CHUNK_SHOTS
        else:
            aim_s = min(MAX_CHUNK_S, FIRST_CHUNK_S * 2 ** self.chunks)
            want = int(aim_s * self.shots / self.seconds)
            # grow at most 2x what is measured: a rate from a few shots is too noisy to trust more
            want = min(want, 2 * self.shots)
        if self.errors:
            # stay near the error budget: the shots still needed once the chunks in flight are
            # counted at the measured error rate (plus 10%); none when those should suffice
            rate = self.errors / self.shots
            needed = (self.item.errors_left - self.errors) / rate - sum(self.in_flight.values())
            if needed <= 0:
                return 0
            want = min(want, int(1.1 * needed) + 1)
        if self.shots and self.seconds > 0 and math.isfinite(cap_seconds):
            want = min(want, max(FIRST_CHUNK_SHOTS, int(cap_seconds * self.shots / self.seconds)))
        return max(1, min(want, unclaimed))


def _workers(client: Any) -> int:
    return max(1, len(client.scheduler_info().get("workers", {})))


def run_on_cluster(items: Sequence[WorkItem], *, spec: str | ClusterSpec, rule: StoppingRule,
                   sink: ChunkSink, console: Console) -> None:
    """Sample ``items`` on a dask cluster until each meets what it has left of ``rule``.

    At most ~2 chunks per worker are in flight; results are written in completion order.
    """
    if isinstance(spec, str):
        spec = parse_cluster(spec)
    with connect(spec, console) as client:
        drive_chunks(client, items, sink, console=console)


def drive_chunks(client: Any, items: Sequence[WorkItem], sink: ChunkSink, *,
                 console: Console | None = None, timeout: float | None = None) -> None:
    """Run ``items`` as chunks on ``client``'s cluster until each meets what it has left.

    While no worker runs (all gone, or all paused by their memory limit) it says so every few
    seconds and gives up after ``timeout`` seconds (default :func:`worker_timeout`) with a
    :class:`ClusterError`; every chunk finished before is already in ``sink``.
    """
    from distributed import as_completed
    from rich.console import Console

    watch = WorkerWatch(client, console if console is not None else Console(stderr=True),
                        timeout=timeout if timeout is not None else worker_timeout(),
                        where=str(getattr(client, "scheduler", None) and client.scheduler.address))
    tasks = [_Progress(item=it, text=str(it.task.circuit)) for it in items]  # largest first
    futures: dict[str, tuple[Any, _Progress, int]] = {}  # chunk id -> (future, task, attempt)
    by_key: dict[str, str] = {}  # future key -> chunk id
    written: set[str] = set()
    # bind to this client's loop: another Client may be the process default (tests, notebooks).
    # Results are fetched as each chunk finishes (a few numbers each): fetching them later could
    # wait forever when the worker holding one is gone and no worker is left to recompute it
    done = as_completed(loop=client.loop, with_results=True, raise_errors=False)

    def submit(tp: _Progress, shots: int, chunk_id: str, attempt: int) -> None:
        fut = client.submit(sample_chunk, chunk_id=chunk_id, strong_id=tp.item.strong_id,
                            circuit_text=tp.text, decoder=str(tp.item.task.decoder), shots=shots,
                            leakage=leakage_of(tp.item.task),
                            key=f"planner-chunk-{chunk_id}-{attempt}", pure=False,
                            priority=tp.item.size)
        tp.in_flight[chunk_id] = shots
        futures[chunk_id] = (fut, tp, attempt)
        by_key[fut.key] = chunk_id
        done.add(fut)

    def fill() -> None:
        n = max(1, watch.running)
        slots = IN_FLIGHT_PER_WORKER * n - len(futures)
        while slots > 0:
            # a chunk is at most a small share of all the work left, so the sweep ends evenly
            cap = max(MIN_TAIL_CHUNK_S, sum(tp.unclaimed_seconds() for tp in tasks) / (TAIL_SHARES * n))
            # the open task with the fewest chunks in flight, larger circuits first on ties
            open_tasks = [(len(tp.in_flight), k, tp) for k, tp in enumerate(tasks)]
            open_tasks = [(c, k, tp) for c, k, tp in open_tasks if tp.next_chunk_shots(cap) > 0]
            if not open_tasks:
                return
            _, _, tp = min(open_tasks, key=lambda e: (e[0], e[1]))
            submit(tp, tp.next_chunk_shots(cap), new_chunk_id(), 0)
            slots -= 1

    def finished(fut: Any, res: Any) -> None:
        chunk_id = by_key.pop(fut.key, None)
        if chunk_id is None or chunk_id not in futures:  # cancelled and forgotten already
            return
        _, tp, attempt = futures.pop(chunk_id)
        shots = tp.in_flight.pop(chunk_id)
        fut.release()
        if fut.status == "cancelled":
            return
        if isinstance(res, BaseException):
            # lost workers surface here: rerun the chunk (same id); anything else re-raises
            if type(res).__name__ in ("KilledWorker", "CommClosedError") and attempt < RESUBMITS:
                submit(tp, shots, chunk_id, attempt + 1)
                return
            raise res
        if res.chunk_id not in written:  # a chunk that somehow came back twice counts once
            written.add(res.chunk_id)
            tp.shots += res.shots
            tp.errors += res.errors
            tp.seconds += res.seconds
            tp.chunks += 1
            sink(sinter.TaskStats(strong_id=tp.item.strong_id, decoder=str(tp.item.task.decoder),
                                  json_metadata=tp.item.task.json_metadata, shots=res.shots,
                                  errors=res.errors, discards=res.discards, seconds=res.seconds),
                 res.chunk_id)
        if tp.met and tp.in_flight:
            # the rule is met: chunks still running for this task would only overshoot
            for c in list(tp.in_flight):
                f, _, _ = futures.pop(c)
                tp.in_flight.pop(c)
                by_key.pop(f.key, None)
                f.cancel()

    try:
        watch.check(force=True)
        fill()
        while futures:
            with done.thread_condition:  # as distributed's own iterator waits, with a timeout
                if not done.has_ready():
                    done.thread_condition.wait(timeout=0.25)
            batch = done.next_batch(block=False) if done.has_ready() else []
            for fut, res in batch:
                finished(fut, res)
            watch.check()  # says "waiting for workers"; raises once it has waited too long
            if batch:
                fill()
    except BaseException:
        _cancel_all(futures)
        raise


def _cancel_all(futures: dict[str, tuple[Any, Any, int]]) -> None:
    for f, _, _ in futures.values():
        f.cancel()
    futures.clear()
