"""The dask engine's connection: ``--cluster`` addresses, reaching a scheduler, watching workers.

``--cluster local:N`` starts (and closes) a LocalCluster of N single-threaded worker processes;
``--cluster tcp://host:8786`` joins a running scheduler. The chunks themselves are in
:mod:`planner.sampling.chunks`.
"""

from __future__ import annotations

import dataclasses
import logging
import math
import os
import re
import time
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TYPE_CHECKING, Any

import rich.markup

from planner.errors import InputError
from planner.sampling.work import check_workers

if TYPE_CHECKING:
    from rich.console import Console

_ADDRESS = re.compile(r"^(?:(?P<scheme>[a-z]+)://)?(?P<host>\[[^\]]*\]|[A-Za-z0-9_.\-]+)"
                      r":(?P<port>\d+)$")
_SCHEMES = ("tcp", "tls", "ucx", "ws", "wss")
_ALLOWED = "local:N or a scheduler address, e.g. --cluster local:4, --cluster tcp://host:8786"

#: environment variables that tune the cluster engine (seconds / a logging level name)
CONNECT_TIMEOUT_ENV = "PLANNER_CLUSTER_TIMEOUT"
WORKER_TIMEOUT_ENV = "PLANNER_WORKER_TIMEOUT"
LOG_LEVEL_ENV = "PLANNER_DASK_LOG_LEVEL"
CONNECT_TIMEOUT_S = 30.0  # a scheduler answers within this, or the address is wrong
WORKER_TIMEOUT_S = 300.0  # no running worker for this long: give up (chunks done are kept)
NOTE_EVERY_S = 10.0  # how often "waiting for workers" is repeated while waiting


class ClusterError(InputError):
    """The cluster cannot do the job (unreachable, not a scheduler, no workers): one line, exit 2.
    Its field is ``cluster``."""

    def __init__(self, problem: str, *, field: str | None = "cluster", allowed: str | None = None,
                 source: str | None = None) -> None:
        super().__init__(problem, field=field, allowed=allowed, source=source)


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

    text = text.strip()
    if text.startswith("local"):
        m = re.fullmatch(r"local:(\d{1,12})", text)
        if not m or int(m[1]) < 1:
            raise InputError(f"{text!r}: use local:N with N >= 1 worker processes", field="cluster",
                             allowed=_ALLOWED)
        return ClusterSpec(local_workers=check_workers(int(m[1]), prefix="--cluster local:N"))
    m = _ADDRESS.match(text)
    if not m:
        raise InputError(f"{text[:80]!r} is neither local:N nor a scheduler address like "
                         "tcp://host:8786", field="cluster", allowed=_ALLOWED)
    if m["scheme"] is not None and m["scheme"] not in _SCHEMES:
        raise InputError(f"{text[:80]!r}: the scheme {m['scheme']}:// is not a dask protocol "
                         f"({', '.join(_SCHEMES)})", field="cluster", allowed=_ALLOWED)
    host = m["host"]
    if host.startswith("["):
        try:
            ipaddress.IPv6Address(host[1:-1])
        except ValueError:
            raise InputError(f"{text[:80]!r}: {host} is not an IPv6 address in brackets "
                             "(e.g. tcp://[::1]:8786)", field="cluster", allowed=_ALLOWED) from None
    port = int(m["port"])
    if not 1 <= port <= 65535:
        raise InputError(f"{text[:80]!r}: port {port} is not allowed (1 ... 65535)", field="cluster",
                         allowed=_ALLOWED)
    return ClusterSpec(address=text)


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
            raise ClusterError(f"cannot reach a dask scheduler at {address} "
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
        raise ClusterError(f"{address} accepted a connection but no dask scheduler "
                           f"answered within {timeout:g} s; check the host and the port (the "
                           f"scheduler's, usually 8786; {CONNECT_TIMEOUT_ENV} sets the wait)") from None
    except (OSError, ValueError) as exc:
        raise ClusterError(f"cannot reach a dask scheduler at {address} ({exc}); "
                           "check that it runs and the address") from None
    except Exception as exc:  # noqa: BLE001 - whatever a stranger on that port sends back
        raise ClusterError(f"{address} is not a dask scheduler (it answered "
                           f"{type(exc).__name__}); check the host and the port") from None
    if not isinstance(answer, dict) or answer.get("type") != "Scheduler":
        raise ClusterError(f"{address} answered, but not as a dask scheduler; check "
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
            raise ClusterError(f"lost the dask scheduler at {self.where} "
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
            raise ClusterError(f"no dask worker has been running for {waited:.0f} s at "
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
            # the worker processes load planner.sampling.orphans: they exit when this process dies
            with LocalCluster(n_workers=spec.local_workers, threads_per_worker=1, processes=True,
                              dashboard_address=":0", silence_logs=level,
                              preload=["planner.sampling.orphans"]) as cluster, \
                    Client(cluster, timeout=f"{timeout}s") as client:
                yield client
            return
        assert spec.address is not None
        _probe_scheduler(spec.address, timeout)
        try:
            client = Client(spec.address, timeout=f"{timeout}s")
        except (OSError, TimeoutError) as exc:
            raise ClusterError(f"cannot reach a dask scheduler at {spec.address} "
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
