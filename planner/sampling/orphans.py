"""Sampling worker processes exit when the process that started them dies.

A sweep's workers (sinter's spawned processes, a local dask cluster's worker processes) would
otherwise outlive a SIGKILLed or SIGTERMed sweep, sampling into nothing and holding its stdout
open (``planner sweep | tee log`` would never end). Each worker calls :func:`guard_worker` when
it starts:

- on Linux, ``prctl(PR_SET_PDEATHSIG)`` asks the kernel for a signal when the parent goes; the
  handler exits if the parent pid has really changed (the signal also comes when only the thread
  that started the worker ends);
- everywhere, a daemon thread polls the parent pid every half second as the fallback;
- Ctrl-C in a terminal reaches every process of the foreground group: workers ignore it and
  leave the interrupt to the sweep, which stops them (no traceback from each worker).

Hooks: sinter pickles its decoders into each worker, so :class:`GuardToken` (an unused entry of
``custom_decoders``) runs the guard when a worker unpickles it; dask workers load this module as
a preload (``dask_setup``).
"""

from __future__ import annotations

import contextlib
import os
import signal
import sys
import threading
import time
from typing import Any

POLL_S = 0.5
_PR_SET_PDEATHSIG = 1
_guarded_parent: int | None = None


def _exit_if_orphaned(parent: int) -> None:
    if os.getppid() != parent:
        os._exit(1)  # the sweep is gone: nothing would read what this worker samples


def _watch(parent: int) -> None:
    while True:
        time.sleep(POLL_S)
        _exit_if_orphaned(parent)


def guard_worker(parent_pid: int | None = None, *, ignore_sigint: bool = True) -> None:
    """Make this (worker) process exit when ``parent_pid`` (default: its parent now) dies.

    Idempotent. Signal handlers are set only when called from the main thread.
    """
    global _guarded_parent
    if _guarded_parent is not None:
        return
    parent = parent_pid if parent_pid is not None else os.getppid()
    _guarded_parent = parent
    main = threading.current_thread() is threading.main_thread()
    if main and ignore_sigint:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    if main and sys.platform.startswith("linux"):
        with contextlib.suppress(Exception):  # no libc or no prctl: the watch thread remains
            import ctypes

            libc = ctypes.CDLL(None, use_errno=True)
            signal.signal(signal.SIGUSR2, lambda *_: _exit_if_orphaned(parent))
            libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGUSR2), 0, 0, 0)
    _exit_if_orphaned(parent)  # the parent may have died before the signal was armed
    threading.Thread(target=_watch, args=(parent,), name="planner-parent-watch", daemon=True).start()


def _guarded_token(parent_pid: int) -> GuardToken:
    guard_worker(parent_pid)
    return GuardToken(parent_pid)


class GuardToken:
    """Unpickling this object in a worker process guards that worker (see module docstring).

    It is never used as a decoder: it rides along in sinter's ``custom_decoders`` under a name
    no task asks for.
    """

    NAME = "_planner_parent_guard"

    def __init__(self, parent_pid: int | None = None) -> None:
        self.parent_pid = parent_pid if parent_pid is not None else os.getpid()

    def __reduce__(self) -> tuple[Any, tuple[int]]:
        return _guarded_token, (self.parent_pid,)


def dask_setup(worker: Any) -> None:
    """dask preload hook: guard a local cluster's worker process against its parent's death."""
    guard_worker()
