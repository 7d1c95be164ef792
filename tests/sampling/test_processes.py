"""Processes, clusters and concurrency (issue 9): the out-directory lock, clusters that hang or
lose their workers, workers orphaned by a killed sweep, Ctrl-C noise, bad worker counts and
cluster addresses, progress lines in logs."""

from __future__ import annotations

import logging
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import psutil
import pytest
import sinter
import stim
from rich.console import Console
from typer.testing import CliRunner

from planner.cli import app
from planner.sampling.dask import ClusterError, WorkerCount, connect, dask_log_level, parse_cluster
from planner.errors import InputError
from tests.helpers.targets import TINY_REPETITION
from planner.store.lock import LOCK_NAME, out_dir_lock
from planner.sampling import SweepProgress, WorkItem, check_workers, max_workers, run_sweep
from planner.store import SampleStore
from planner.sweep import StoppingRule

runner = CliRunner()
PLANNER = [sys.executable, "-m", "planner"]

TINY = TINY_REPETITION


def _target(tmp_path: Path, p: float = 0.02) -> Path:
    path = tmp_path / "tiny.toml"
    path.write_text(TINY.format(p=p))
    return path


def _one_line_error(res: object, needle: str) -> str:
    code = getattr(res, "exit_code", None)
    if code is None:
        code = res.returncode  # type: ignore[attr-defined]
    stderr = res.stderr if isinstance(res.stderr, str) else res.stderr.decode()  # type: ignore[attr-defined]
    assert code == 2, stderr
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error: "), stderr
    assert needle in lines[0], lines[0]
    assert "Traceback" not in stderr
    return lines[0]


def rep_task(*, d: int, p: float = 0.05) -> sinter.Task:
    circuit = stim.Circuit.generated("repetition_code:memory", distance=d, rounds=1,
                                     before_round_data_depolarization=1.5 * p)
    meta = {"code": "repetition", "d": d, "basis": "z", "rounds": 1, "axis": "joint",
            "factor": p, "scales": {}}
    return sinter.Task(circuit=circuit, decoder="pymatching", json_metadata=meta)


def quiet() -> Console:
    return Console(stderr=True, quiet=True)


def _rows(out: Path) -> int:
    try:
        return len(list(SampleStore(out).rows()))
    except (FileNotFoundError, InputError):
        return 0


def _wait_for(condition, *, limit_s: float = 120.0, step_s: float = 0.1) -> bool:  # noqa: ANN001
    """Poll ``condition`` until true or ``limit_s`` passed (a bound against hangs, not a speed
    assertion)."""
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        if condition():
            return True
        time.sleep(step_s)
    return condition()


# ---------------------------------------------------------------------------------------------
# 4. the out-directory lock


@pytest.mark.slow
def test_second_sweep_into_a_locked_out_dir_is_refused(tmp_path: Path) -> None:
    out = tmp_path / "out"
    out.mkdir()
    tasks = [rep_task(d=3)]
    rule = StoppingRule(max_errors=10**9, max_shots=1_000)
    with out_dir_lock(out):
        with pytest.raises(InputError, match=rf"{out}: another sweep \(pid {os.getpid()}\)"):
            run_sweep(tasks, store=SampleStore(out), rule=rule, workers=1, console=quiet())
        assert _rows(out) == 0  # refused before sampling anything
    # the lock is gone with its holder: the same sweep now runs, and leaves no lock file
    s = run_sweep(tasks, store=SampleStore(out), rule=rule, workers=1, console=quiet())
    assert s.new_shots == 1_000
    assert not (out / LOCK_NAME).exists()


@pytest.mark.slow
def test_locked_out_dir_cli_one_line_and_readers_keep_working(tmp_path: Path) -> None:
    target = _target(tmp_path)
    out = tmp_path / "out"
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1", "-q"])
    assert res.exit_code == 0, res.stderr
    with out_dir_lock(out):
        for cmd in (["sweep", str(target)], ["run", str(target)]):
            res = runner.invoke(app, [*cmd, "--out", str(out), "--workers", "1"])
            line = _one_line_error(res, str(out))
            assert f"pid {os.getpid()}" in line and "another sweep" in line
        # readers take no lock
        assert runner.invoke(app, ["status", str(out), "--json"]).exit_code == 0
        assert runner.invoke(app, ["fit", str(out), "--json"]).exit_code == 0


def test_shard_jobs_share_the_lock_but_not_with_a_full_sweep(tmp_path: Path) -> None:
    with out_dir_lock(tmp_path, shared=True), out_dir_lock(tmp_path, shared=True):
        with pytest.raises(InputError, match="another sweep"):
            with out_dir_lock(tmp_path):
                pass
    with out_dir_lock(tmp_path):
        with pytest.raises(InputError, match="a full sweep"):
            with out_dir_lock(tmp_path, shared=True):
                pass
    assert not (tmp_path / LOCK_NAME).exists()


@pytest.mark.slow
def test_two_shard_jobs_into_one_dir_at_once(tmp_path: Path) -> None:
    tasks = [rep_task(d=3), rep_task(d=5)]
    rule = StoppingRule(max_errors=10**9, max_shots=2_000)
    with out_dir_lock(tmp_path, shared=True):  # as if shard 2/2 were running
        s = run_sweep(tasks, store=SampleStore(tmp_path), rule=rule, workers=1, shard=(1, 2),
                      console=quiet())
    assert s.new_shots == 2_000 and s.shard_file.name == "shard-1-of-2.csv"


LOCK_HOLDER = """
import sys, time
from planner.store.lock import out_dir_lock
with out_dir_lock(sys.argv[1]):
    print("locked", flush=True)
    time.sleep(600)
"""


def test_lock_is_released_when_its_holder_is_killed(tmp_path: Path) -> None:
    with subprocess.Popen([sys.executable, "-c", LOCK_HOLDER, str(tmp_path)],
                          stdout=subprocess.PIPE) as proc:
        try:
            assert proc.stdout.readline().strip() == b"locked"
            with pytest.raises(InputError, match=f"pid {proc.pid}"):
                with out_dir_lock(tmp_path):
                    pass
        finally:
            proc.kill()
    with out_dir_lock(tmp_path):  # no stale lock after a SIGKILL
        pass


# ---------------------------------------------------------------------------------------------
# 5. hangs: a port that says nothing, a cluster without workers


@pytest.fixture
def silent_port() -> Iterator[int]:
    """A local TCP server that accepts connections and never says anything."""
    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(16)
    held: list[socket.socket] = []
    stop = threading.Event()

    def accept() -> None:
        srv.settimeout(0.2)
        while not stop.is_set():
            try:
                held.append(srv.accept()[0])
            except OSError:
                continue

    t = threading.Thread(target=accept, daemon=True)
    t.start()
    yield srv.getsockname()[1]
    stop.set()
    t.join()
    for c in held:
        c.close()
    srv.close()


def _closed_port() -> int:
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["silent", "closed"])
def test_cluster_address_that_is_not_a_scheduler_exits_2_and_leaves_no_manifest(
        tmp_path: Path, silent_port: int, kind: str) -> None:
    port = silent_port if kind == "silent" else _closed_port()
    target = _target(tmp_path)
    out = tmp_path / "out"
    env = {**os.environ, "PLANNER_CLUSTER_TIMEOUT": "2"}
    res = subprocess.run([*PLANNER, "sweep", str(target), "--out", str(out), "--cluster",
                          f"tcp://127.0.0.1:{port}"], capture_output=True, env=env, timeout=120)
    line = _one_line_error(res, "--cluster: ")
    assert ("no dask scheduler answered within 2 s" if kind == "silent" else "cannot reach") in line
    assert not (out / "manifest.json").exists()
    assert not out.exists()  # nothing left behind at all


@pytest.mark.slow
def test_scheduler_without_workers_says_waiting_then_gives_up(monkeypatch: pytest.MonkeyPatch) -> None:
    from distributed import LocalCluster

    monkeypatch.setenv("PLANNER_WORKER_TIMEOUT", "2")
    console = Console(stderr=True, record=True, width=200)
    with LocalCluster(n_workers=0, processes=True, dashboard_address=":0",
                      silence_logs=logging.CRITICAL) as cluster:
        with pytest.raises(ClusterError, match="no dask worker has been running for"):
            with connect(parse_cluster(cluster.scheduler_address), console):
                pass
    assert "waiting for dask workers" in console.export_text()


@pytest.mark.slow
def test_all_workers_gone_mid_sweep_is_a_clear_error_and_chunks_are_kept(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from distributed import LocalCluster

    monkeypatch.setenv("PLANNER_WORKER_TIMEOUT", "3")
    rule = StoppingRule(max_errors=10**9, max_shots=10**9)
    console = Console(stderr=True, record=True, width=300)
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=":0",
                      silence_logs=logging.CRITICAL) as cluster:

        def retire_when_rows_flow() -> None:
            _wait_for(lambda: _rows(tmp_path) >= 3)
            cluster.scale(0)  # every worker gone (as when batch jobs end), none to come back

        t = threading.Thread(target=retire_when_rows_flow)
        t.start()
        try:
            with pytest.raises(ClusterError, match="no dask worker has been running") as err:
                run_sweep([rep_task(d=5)], store=SampleStore(tmp_path), rule=rule,
                          cluster=cluster.scheduler_address, console=console)
        finally:
            t.join()
    assert "finished chunks are saved" in str(err.value)
    assert _rows(tmp_path) >= 3  # what finished before is on disk
    assert "waiting for dask workers" in console.export_text()


def test_worker_states_are_counted() -> None:
    info = {"workers": {"a": {"status": "paused"}, "b": {"status": "paused"},
                        "c": {"status": "closing_gracefully"}}}
    count = WorkerCount.from_info(info)
    assert (count.running, count.paused, count.other) == (0, 2, 1)
    assert "2 worker(s) paused by their memory limit" in count.describe()


# ---------------------------------------------------------------------------------------------
# 6. no orphans, 7. Ctrl-C


def _start_long_sweep(tmp_path: Path, *extra: str) -> tuple[subprocess.Popen, Path]:
    target = _target(tmp_path, p=0.002)
    out = tmp_path / "out"
    proc = subprocess.Popen([*PLANNER, "sweep", str(target), "--out", str(out), "--budget",
                             "overnight", *extra], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            start_new_session=True)
    if not _wait_for(lambda: _rows(out) >= 2 or proc.poll() is not None, limit_s=240) \
            or proc.poll() is not None:
        _stop(proc)
        pytest.fail(f"the sweep did not get going: {proc.communicate()[1].decode()}")
    return proc, out


def _stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


def _alive(procs: list[psutil.Process]) -> list[psutil.Process]:
    out = []
    for p in procs:
        try:
            if p.is_running() and p.status() != psutil.STATUS_ZOMBIE:
                out.append(p)
        except psutil.NoSuchProcess:
            pass
    return out


@pytest.mark.slow
@pytest.mark.parametrize(("sig", "engine"), [(signal.SIGKILL, "local"), (signal.SIGTERM, "local"),
                                             (signal.SIGKILL, "dask")])
def test_killing_the_sweep_leaves_no_worker_behind(tmp_path: Path, sig: int, engine: str) -> None:
    extra = ("--workers", "2") if engine == "local" else ("--cluster", "local:2")
    proc, _ = _start_long_sweep(tmp_path, *extra)
    workers = psutil.Process(proc.pid).children(recursive=True)
    assert workers, "the sweep has no worker processes"
    # `planner sweep | tee log` ends only when every holder of the pipe is gone
    eof = threading.Event()
    reader = threading.Thread(target=lambda: (proc.stdout.read(), eof.set()), daemon=True)
    reader.start()
    with proc:
        try:
            os.kill(proc.pid, sig)  # the main process only, as `kill` or the OOM killer would
            proc.wait(timeout=60)
            assert _wait_for(lambda: not _alive(workers), limit_s=60), _alive(workers)
            assert eof.wait(timeout=60), "stdout still held open"
        finally:
            for p in _alive(workers):
                p.kill()
            _stop(proc)


@pytest.mark.slow
def test_ctrl_c_on_a_cluster_sweep_prints_one_line_and_exits_130(tmp_path: Path) -> None:
    proc, out = _start_long_sweep(tmp_path, "--cluster", "local:2")
    workers = psutil.Process(proc.pid).children(recursive=True)
    with proc:
        try:
            os.killpg(proc.pid, signal.SIGINT)  # Ctrl-C reaches the whole foreground group
            _, err = proc.communicate(timeout=120)
        finally:
            _stop(proc)
    text = err.decode()
    assert proc.returncode == 130, text
    lines = text.strip().splitlines()
    assert lines[-1] == "interrupted: finished chunks are saved; run the same command again to resume"
    allowed = ("starting a local dask cluster", "sampling ", "interrupted: ")
    assert all(line.startswith(allowed) for line in lines), text  # no traceback, no dask log line
    assert _rows(out) >= 2
    assert _wait_for(lambda: not _alive(workers), limit_s=60), _alive(workers)


# ---------------------------------------------------------------------------------------------
# bad input, log level, progress lines


@pytest.mark.parametrize(("args", "needle"), [
    (["--workers", "1000000000"], "--workers: 1000000000 worker processes is more than"),
    (["--cluster", "local:1000000000"], "--cluster local:N: 1000000000 worker processes"),
    (["--cluster", "tcp://[::1"], "--cluster: 'tcp://[::1' is neither"),
    (["--cluster", "tcp://10.0.0.1:65536"], "--cluster: 'tcp://10.0.0.1:65536': port 65536"),
    (["--cluster", "tcp://[::1]:99999"], "port 99999 is not allowed"),
    (["--cluster", "http://host:8786"], "the scheme http:// is not a dask protocol"),
])
def test_bad_workers_and_cluster_addresses(tmp_path: Path, args: list[str], needle: str) -> None:
    target = _target(tmp_path)
    res = runner.invoke(app, ["sweep", str(target), "--out", str(tmp_path / "o"), *args])
    _one_line_error(res, needle)
    assert not (tmp_path / "o").exists()


def test_run_refuses_too_many_workers(tmp_path: Path) -> None:
    res = runner.invoke(app, ["run", str(_target(tmp_path)), "--out", str(tmp_path / "o"),
                              "--workers", str(max_workers() + 1)])
    _one_line_error(res, "--workers: ")


def test_worker_cap_and_good_addresses() -> None:
    assert check_workers(max_workers()) == max_workers()
    assert parse_cluster("tcp://[::1]:8786").address == "tcp://[::1]:8786"
    assert parse_cluster("tls://node-1.example.org:8786").address == "tls://node-1.example.org:8786"


def test_dask_log_level_is_the_users_choice(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("PLANNER_DASK_LOG_LEVEL", raising=False)
    assert dask_log_level() == logging.CRITICAL  # quiet by default
    monkeypatch.setenv("PLANNER_DASK_LOG_LEVEL", "warning")
    assert dask_log_level() == logging.WARNING
    monkeypatch.setenv("PLANNER_DASK_LOG_LEVEL", "loud")
    with pytest.raises(InputError, match="PLANNER_DASK_LOG_LEVEL: 'loud' is not a log level"):
        dask_log_level()


def test_progress_in_a_log_is_whole_lines(monkeypatch: pytest.MonkeyPatch) -> None:
    import io

    import planner.sampling.progress as sampling

    monkeypatch.setattr(sampling, "LOG_PROGRESS_EVERY_S", 0.0)
    buf = io.StringIO()
    console = Console(file=buf, width=40, force_terminal=False)
    task = rep_task(d=3)
    items = [WorkItem(task=task, strong_id=f"id{k}", shots_left=1000, errors_left=100) for k in range(3)]
    with SweepProgress(items, StoppingRule(max_errors=100, max_shots=1000), console) as bar:
        for k in range(3):
            bar.add(sinter.TaskStats(strong_id=f"id{k}", decoder="pymatching", json_metadata=None,
                                     shots=500, errors=1))
    lines = buf.getvalue().splitlines()
    assert len(lines) == 4  # one per update and one at the end, none cut at 40 columns
    assert all(line.startswith("sampling: ") and line.endswith("tasks left") for line in lines)
    assert lines[-1].startswith("sampling: 50% of the budget, 1,500 shots, 3 errors")


GUARDED_PARENT = """
import multiprocessing, sys, time

def busy(token, seconds):
    time.sleep(seconds)  # a worker deep in a long batch: it would not notice its parent's death

if __name__ == "__main__":
    from planner.sampling.orphans import GuardToken
    token = GuardToken() if sys.argv[1] == "guarded" else None
    child = multiprocessing.get_context("spawn").Process(target=busy, args=(token, 600))
    child.start()
    print(child.pid, flush=True)
    time.sleep(600)
"""

def test_a_busy_worker_exits_when_its_parent_is_killed(tmp_path: Path) -> None:
    """The hook planner puts in sinter's spawned workers (a pickled token, as in
    ``custom_decoders``): a worker busy for 10 minutes still exits once its parent is SIGKILLed.
    Without the guard it sleeps on (checked by hand: alive 40 s later); the bound below only
    stops a hang."""
    script = GUARDED_PARENT
    path = tmp_path / "parent.py"  # a file: spawned children import their target from it
    path.write_text(script)
    with subprocess.Popen([sys.executable, str(path), "guarded"], stdout=subprocess.PIPE,
                          cwd=tmp_path, start_new_session=True) as parent:
        try:
            pids = [int(x) for x in parent.stdout.readline().split()]
            assert pids
            workers = [psutil.Process(pid) for pid in pids]
            os.kill(parent.pid, signal.SIGKILL)
            parent.wait()
            assert _wait_for(lambda: not _alive(workers), limit_s=60), _alive(workers)
        finally:
            for p in _alive(workers):
                p.kill()
            _stop(parent)


@pytest.mark.slow
def test_local_cluster_workers_carry_the_guard() -> None:
    """The worker processes of ``--cluster local:N`` load planner.orphans: they watch their
    parent and leave Ctrl-C to the sweep (no traceback from each worker)."""
    import threading as th

    def probe() -> tuple[list[str], object]:
        return ([t.name for t in th.enumerate() if t.name == "planner-parent-watch"],
                signal.getsignal(signal.SIGINT))

    with connect(parse_cluster("local:1"), quiet()) as client:
        (threads, sigint), = client.run(probe).values()
    assert threads == ["planner-parent-watch"]
    assert sigint == signal.SIG_IGN


@pytest.mark.slow
def test_a_worker_paused_by_its_memory_limit_is_named_and_not_waited_on_forever(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    import dask
    from distributed import LocalCluster

    monkeypatch.setenv("PLANNER_WORKER_TIMEOUT", "3")
    console = Console(stderr=True, record=True, width=300)
    # pause at 1% of a 1 GiB limit: a Python process with dask loaded is always above that
    memory = {"distributed.worker.memory.pause": 0.01, "distributed.worker.memory.terminate": False,
              "distributed.worker.memory.target": False, "distributed.worker.memory.spill": False}
    with dask.config.set(memory), LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                                               memory_limit="1GiB", dashboard_address=":0",
                                               silence_logs=logging.CRITICAL) as cluster:
        with pytest.raises(ClusterError, match="1 worker\\(s\\) paused by their memory limit"):
            run_sweep([rep_task(d=3)], store=SampleStore(tmp_path),
                      rule=StoppingRule(max_errors=10**9, max_shots=10_000),
                      cluster=cluster.scheduler_address, console=console)
    assert "waiting for dask workers" in console.export_text()
