"""The dask engine: tasks cut into chunks sized by measured time, run on a dask cluster.

``--cluster local:N`` starts (and closes) a LocalCluster of N single-threaded worker processes;
``--cluster tcp://host:8786`` joins a running scheduler. Each chunk carries the circuit text (not
a detector error model, not a scattered future): a worker compiles sampler and decoder once per
circuit and keeps the last few. The chunk id is fixed when a chunk is submitted, so a chunk that
dask reruns after losing a worker is still written, and counted, once.
"""

from __future__ import annotations

import collections
import dataclasses
import logging
import math
import os
import re
import threading
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

import numpy as np
import rich.markup
import sinter
import stim

from planner.errors import InputError
from planner.manifest import detector_error_model_for
from planner.store import new_chunk_id
from planner.sweep import StoppingRule

if TYPE_CHECKING:
    from rich.console import Console

    from planner.sampling import ChunkSink, WorkItem

FIRST_CHUNK_SHOTS = 200  # before anything is measured: small, so the first timing comes fast
FIRST_CHUNK_S = 1.0  # target seconds of work per chunk, doubling per finished chunk of a task ...
MAX_CHUNK_S = 16.0  # ... up to this
IN_FLIGHT_PER_WORKER = 2
TAIL_SHARES = 4  # a chunk holds at most 1/(4 x workers) of the work left ...
MIN_TAIL_CHUNK_S = 0.25  # ... but not less than this
CACHE_CIRCUITS = 8
RESUBMITS = 3  # a chunk whose workers all died (KilledWorker) is resubmitted, same chunk id

_ADDRESS = re.compile(r"^(?:(?P<scheme>[a-z]+)://)?(?P<host>\[[^\]]*\]|[A-Za-z0-9_.\-]+)"
                      r":(?P<port>\d+)$")
_SCHEMES = ("tcp", "tls", "ucx", "ws", "wss")

#: environment variables that tune the cluster engine (seconds / a logging level name)
CONNECT_TIMEOUT_ENV = "PLANNER_CLUSTER_TIMEOUT"
WORKER_TIMEOUT_ENV = "PLANNER_WORKER_TIMEOUT"
LOG_LEVEL_ENV = "PLANNER_DASK_LOG_LEVEL"
CONNECT_TIMEOUT_S = 30.0  # a scheduler answers within this, or the address is wrong
WORKER_TIMEOUT_S = 300.0  # no running worker for this long: give up (chunks done are kept)
NOTE_EVERY_S = 10.0  # how often "waiting for workers" is repeated while waiting


class ClusterError(InputError):
    """The cluster cannot do the job (unreachable, not a scheduler, no workers): one line, exit 2."""


def _env_seconds(name: str, default: float) -> float:
    text = os.environ.get(name, "").strip()
    if not text:
        return default
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"{name}: {text!r} is not allowed: seconds > 0 (e.g. 30)")
    return value


def connect_timeout() -> float:
    """Seconds a scheduler address has to answer (env ``PLANNER_CLUSTER_TIMEOUT``, default 30)."""
    return _env_seconds(CONNECT_TIMEOUT_ENV, CONNECT_TIMEOUT_S)


def worker_timeout() -> float:
    """Seconds without a running worker before giving up (env ``PLANNER_WORKER_TIMEOUT``,
    default 300)."""
    return _env_seconds(WORKER_TIMEOUT_ENV, WORKER_TIMEOUT_S)


def dask_log_level() -> int:
    """Level for dask's own log lines (env ``PLANNER_DASK_LOG_LEVEL``: debug, info, warning,
    error, critical; default critical: planner says what went wrong in its own words)."""
    text = os.environ.get(LOG_LEVEL_ENV, "").strip().upper() or "CRITICAL"
    level = logging.getLevelName(text)
    if not isinstance(level, int):
        raise InputError(f"{LOG_LEVEL_ENV}: {text.lower()!r} is not a log level: debug, info, "
                         "warning, error or critical")
    return level


@dataclasses.dataclass(frozen=True)
class ClusterSpec:
    """Either a LocalCluster size or a scheduler address."""

    local_workers: int | None = None
    address: str | None = None


def parse_cluster(text: str) -> ClusterSpec:
    """``local:N`` or a scheduler address (``tcp://host:8786``, ``host:8786``, ``tcp://[::1]:8786``).

    >>> parse_cluster("local:2"), parse_cluster("tcp://10.0.0.5:8786").address
    (ClusterSpec(local_workers=2, address=None), 'tcp://10.0.0.5:8786')
    """
    import ipaddress

    from planner.sampling import check_workers

    text = text.strip()
    if text.startswith("local"):
        m = re.fullmatch(r"local:(\d{1,12})", text)
        if not m or int(m[1]) < 1:
            raise InputError(f"--cluster: {text!r}: use local:N with N >= 1 worker processes")
        return ClusterSpec(local_workers=check_workers(int(m[1]), option="--cluster local:N"))
    m = _ADDRESS.match(text)
    if not m:
        raise InputError(f"--cluster: {text[:80]!r} is neither local:N nor a scheduler address "
                         "like tcp://host:8786")
    if m["scheme"] is not None and m["scheme"] not in _SCHEMES:
        raise InputError(f"--cluster: {text[:80]!r}: the scheme {m['scheme']}:// is not a dask "
                         f"protocol ({', '.join(_SCHEMES)})")
    host = m["host"]
    if host.startswith("["):
        try:
            ipaddress.IPv6Address(host[1:-1])
        except ValueError:
            raise InputError(f"--cluster: {text[:80]!r}: {host} is not an IPv6 address in brackets "
                             "(e.g. tcp://[::1]:8786)") from None
    port = int(m["port"])
    if not 1 <= port <= 65535:
        raise InputError(f"--cluster: {text[:80]!r}: port {port} is not allowed (1 ... 65535)")
    return ClusterSpec(address=text)


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
                 shots: int) -> ChunkResult:
    """Runs on a worker: sample ``shots`` shots, decode, count wrong observable predictions.

    ``seconds`` is the time spent sampling and decoding (compiling is not counted, as in sinter).
    """
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


def _probe_scheduler(address: str, timeout: float) -> None:
    """Ask ``address`` who it is, within ``timeout`` seconds: a ClusterError unless a dask
    scheduler answers. (distributed's own connect waits forever on a port that accepts a TCP
    connection and then says nothing.)"""
    import asyncio
    import socket

    from distributed.comm import connect as comm_connect

    m = _ADDRESS.match(address)
    if m and (m["scheme"] or "tcp") in ("tcp", "tls", "ws", "wss"):
        try:  # a plain TCP connection first: "nothing listens" and "wrong listener" differ
            socket.create_connection((m["host"].strip("[]"), int(m["port"])), timeout=timeout).close()
        except OSError as exc:
            raise ClusterError(f"--cluster: cannot reach a dask scheduler at {address} "
                               f"({exc.strerror or exc}); check that it runs and the address") from None

    from distributed.security import Security

    args = Security().get_connection_args("client")  # TLS settings from the dask config, if any

    async def ask() -> Any:
        comm = await comm_connect(address, timeout=timeout, **args)
        try:
            await comm.write({"op": "identity", "reply": True})
            return await comm.read()
        finally:
            comm.abort()

    try:
        answer = asyncio.run(asyncio.wait_for(ask(), timeout))
    except (TimeoutError, asyncio.TimeoutError):
        raise ClusterError(f"--cluster: {address} accepted a connection but no dask scheduler "
                           f"answered within {timeout:g} s; check the host and the port (the "
                           f"scheduler's, usually 8786; {CONNECT_TIMEOUT_ENV} sets the wait)") from None
    except (OSError, ValueError) as exc:
        raise ClusterError(f"--cluster: cannot reach a dask scheduler at {address} ({exc}); "
                           "check that it runs and the address") from None
    except Exception as exc:  # noqa: BLE001 - whatever a stranger on that port sends back
        raise ClusterError(f"--cluster: {address} is not a dask scheduler (it answered "
                           f"{type(exc).__name__}); check the host and the port") from None
    if not isinstance(answer, dict) or answer.get("type") != "Scheduler":
        raise ClusterError(f"--cluster: {address} answered, but not as a dask scheduler; check "
                           "the port (the scheduler's, usually 8786, not the dashboard's)")


@dataclasses.dataclass(frozen=True)
class WorkerCount:
    """Workers the scheduler knows, by state."""

    running: int
    paused: int
    other: int

    @classmethod
    def from_info(cls, info: dict[str, Any]) -> WorkerCount:
        """From ``scheduler_info()`` / the scheduler's identity.

        >>> WorkerCount.from_info({"workers": {"a": {"status": "running"}, "b": {"status": "paused"}}})
        WorkerCount(running=1, paused=1, other=0)
        """
        states = [str(w.get("status", "running")) for w in (info.get("workers") or {}).values()]
        running = states.count("running")
        paused = states.count("paused")
        return cls(running=running, paused=paused, other=len(states) - running - paused)

    def describe(self) -> str:
        if self.paused:
            return (f"{self.paused} worker(s) paused by their memory limit"
                    + (f", {self.other} closing" if self.other else ""))
        if self.other:
            return f"{self.other} worker(s) closing or not yet started"
        return "no workers"


class WorkerWatch:
    """Notices when a cluster has had no running worker for too long.

    ``check()`` is called often; it asks the scheduler at most once a second, prints "waiting
    for workers" every :data:`NOTE_EVERY_S` while none runs, and raises :class:`ClusterError`
    after ``timeout`` seconds without one.
    """

    def __init__(self, client: Any, console: Console, *, timeout: float, where: str) -> None:
        self.client = client
        self.console = console
        self.timeout = timeout
        self.where = where
        self._asked = -math.inf
        self._since: float | None = None
        self._noted = -math.inf
        self.running = 1

    def count(self) -> WorkerCount:
        return WorkerCount.from_info(self.client.sync(self.client.scheduler.identity))

    def check(self, *, force: bool = False) -> int:
        """Running workers now (cached up to a second); raise after the timeout with none."""
        now = time.monotonic()
        if not force and now - self._asked < 1.0:
            return self.running
        self._asked = now
        try:
            count = self.count()
        except Exception as exc:  # noqa: BLE001 - a lost scheduler surfaces here
            raise ClusterError(f"--cluster: lost the dask scheduler at {self.where} "
                               f"({type(exc).__name__}); finished chunks are saved: run the same "
                               "command again when it is back") from None
        self.running = count.running
        if count.running:
            if self._since is not None:
                self.console.print(f"dask workers are back: {count.running} running", soft_wrap=True)
            self._since = None
            return count.running
        if self._since is None:
            self._since = now
        waited = now - self._since
        if waited >= self.timeout:
            raise ClusterError(f"--cluster: no dask worker has been running for {waited:.0f} s at "
                               f"{self.where} ({count.describe()}); finished chunks are saved: start "
                               "workers (or give them more memory) and run the same command again "
                               f"({WORKER_TIMEOUT_ENV} sets the wait)")
        if now - self._noted >= NOTE_EVERY_S:
            self._noted = now
            self.console.print(f"waiting for dask workers at {self.where}: {count.describe()} "
                               f"(giving up in {self.timeout - waited:.0f} s)", soft_wrap=True)
        return 0


@contextmanager
def connect(spec: ClusterSpec, console: Console) -> Iterator[Any]:
    """A dask Client for ``spec``; a LocalCluster is started here and closed on exit.

    A scheduler address is probed first (a ClusterError within :func:`connect_timeout` seconds
    when nothing answers as a scheduler); then the client waits for a running worker, saying so
    every few seconds, for at most :func:`worker_timeout` seconds.
    """
    level = dask_log_level()
    timeout = connect_timeout()
    wait = worker_timeout()
    from distributed import Client, LocalCluster

    loggers = [logging.getLogger(n) for n in ("distributed", "tornado", "asyncio")]
    before = [lg.level for lg in loggers]
    for lg in loggers:
        lg.setLevel(level)
    try:
        if spec.local_workers is not None:
            console.print(f"starting a local dask cluster: {spec.local_workers} worker processes, "
                          "1 thread each", soft_wrap=True)
            # the worker processes load planner.orphans: they exit when this process dies
            with LocalCluster(n_workers=spec.local_workers, threads_per_worker=1, processes=True,
                              dashboard_address=":0", silence_logs=level,
                              preload=["planner.orphans"]) as cluster, \
                    Client(cluster, timeout=f"{timeout}s") as client:
                yield client
            return
        assert spec.address is not None
        _probe_scheduler(spec.address, timeout)
        try:
            client = Client(spec.address, timeout=f"{timeout}s")
        except (OSError, TimeoutError) as exc:
            raise ClusterError(f"--cluster: cannot reach a dask scheduler at {spec.address} "
                               f"({exc})") from None
        try:
            watch = WorkerWatch(client, console, timeout=wait, where=rich.markup.escape(spec.address))
            while not watch.check(force=True):
                time.sleep(0.5)
            yield client
        finally:
            client.close()
    finally:
        for lg, lv in zip(loggers, before):
            lg.setLevel(lv)


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
