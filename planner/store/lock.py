"""The out-directory lock: one sampling job per out directory at a time (shard jobs excepted).

A sweep holds an exclusive ``flock`` on ``DIR/.planner.lock`` while it samples, so a second
sweep into the same directory is refused with one line naming the directory and the holder's
pid, instead of sampling the budget twice. Shard jobs (``--shard K/N``) hold it shared: several
shards may write one directory at once (each its own shard file), but not next to a full sweep.
Readers (``fit``, ``status``, ``ask``) take no lock. The kernel drops the lock when the holder
dies, however it dies, so a crashed sweep never leaves the directory locked.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import socket
from collections.abc import Iterator
from pathlib import Path

from planner.errors import InputError

#: the lock file's name inside an out directory (planner's own file, like manifest.json)
LOCK_NAME = ".planner.lock"
_RECORD = 160  # bytes of the holder record, padded, so concurrent shared holders overwrite whole


def _holder(fd: int) -> str:
    try:
        text = os.pread(fd, _RECORD, 0).decode("utf-8", errors="replace").strip()
    except OSError:
        return "another planner process"
    pid, _, host = text.partition(" ")
    if not pid.isdigit():
        return "another planner process"
    return f"pid {pid}" + (f" on {host}" if host and host != socket.gethostname() else "")


def _flock(fd: int, mode: int) -> bool:
    try:
        fcntl.flock(fd, mode | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return False
        raise
    return True


@contextlib.contextmanager
def out_dir_lock(out_dir: Path | str, *, shared: bool = False) -> Iterator[Path]:
    """Hold ``out_dir``'s sampling lock (exclusive; ``shared`` for shard jobs) for the block.

    ``out_dir`` must exist. Another holder is an InputError naming the directory and its pid.
    The lock file is removed on release when no one else holds it.
    """
    out_dir = Path(out_dir)
    path = out_dir / LOCK_NAME
    for _ in range(20):  # retry when the file was removed between our open and our flock
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise InputError(f"{out_dir}: cannot create the lock file {LOCK_NAME} "
                             f"({exc.strerror or exc})") from None
        if not _flock(fd, fcntl.LOCK_SH if shared else fcntl.LOCK_EX):
            who = _holder(fd)
            os.close(fd)
            what = "a full sweep" if shared else "another sweep"
            raise InputError(f"{out_dir}: {what} ({who}) is sampling into this directory; wait "
                             "for it to finish or use another --out (fit and status can read it "
                             "meanwhile)")
        try:
            same = os.fstat(fd).st_ino == os.stat(path).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    else:
        raise InputError(f"{out_dir}: could not take the lock {LOCK_NAME} (it keeps being replaced)")
    try:
        record = f"{os.getpid()} {socket.gethostname()}"[: _RECORD - 1].ljust(_RECORD - 1) + "\n"
        with contextlib.suppress(OSError):
            os.pwrite(fd, record.encode(), 0)
        yield path
    finally:
        # remove the file only as its sole holder (an upgrade that fails means others hold it)
        if _flock(fd, fcntl.LOCK_EX):
            with contextlib.suppress(OSError):
                os.unlink(path)
        os.close(fd)
