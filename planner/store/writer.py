"""Appending to one shard file: whole rows, flushed at once, under the shard's lock.

A row is written whole (short writes are continued) and flushed at once; a write that fails
(disk full) is cut back to the row's start and raises, so no half row stays behind; fsync every
~2 s and on close. See :mod:`planner.store.shards` for the rules of the store.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import os
import time
from collections.abc import Callable
from pathlib import Path

import sinter

from planner.errors import InputError
from planner.sampling.work import new_chunk_id
from planner.store.fileio import write_all, write_error
from planner.store.shardfile import HEADER_LINE, file_kind, repair_locked

FSYNC_EVERY_S = 2.0


def try_lock(fd: int) -> bool:
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return False
        raise
    return True


def is_open_on(fd: int, path: Path) -> bool:
    """Whether ``fd`` is still the file at ``path`` (a repair may have replaced it meanwhile)."""
    mine = os.fstat(fd)
    try:
        now = os.stat(path)
    except FileNotFoundError:
        return False
    return (mine.st_dev, mine.st_ino) == (now.st_dev, now.st_ino)


class ShardWriter:
    """Appends rows to one shard file while holding its lock. Use via :meth:`SampleStore.writer`."""

    def __init__(self, path: Path, *, notify: Callable[[str], None] | None = None) -> None:
        self.path = path
        self.repaired_bytes = 0
        self.set_aside_rows = 0
        for _ in range(20):
            fd = self._open_locked(path)
            if fd is None:  # replaced by another process's repair between open and lock
                continue
            try:
                repair = repair_locked(fd, path)
            except BaseException:
                os.close(fd)
                raise
            self.repaired_bytes += repair.removed_bytes
            self.set_aside_rows += len(repair.set_aside)
            if repair.notice and notify is not None:
                notify(repair.notice)
            if repair.replaced:  # our descriptor points at the old file: open the new one
                os.close(fd)
                continue
            break
        else:
            raise InputError(f"{path}: keeps being replaced while opening it; is another program "
                             "rewriting the samples?")
        self._fd = fd
        self._size = os.fstat(fd).st_size
        if self._size == 0:
            try:
                self._write(HEADER_LINE)
            except BaseException:
                self.close(raise_errors=False)
                raise
        self._last_sync = time.monotonic()
        self.rows_written = 0

    @staticmethod
    def _open_locked(path: Path) -> int | None:
        try:
            fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        except OSError as exc:
            raise write_error(path, exc, what="cannot open the shard") from None
        if not try_lock(fd):
            os.close(fd)
            raise InputError(f"{path}: another writer holds this shard (locked); use another "
                             "shard or wait for it to finish")
        if not is_open_on(fd, path):
            os.close(fd)
            return None
        if file_kind(path) != "shard":
            os.close(fd)
            raise InputError(f"{path}: exists and is not a planner sample shard; it is left "
                             "untouched (move it out of the samples directory)")
        return fd

    def _write(self, data: bytes) -> None:
        """Append ``data`` whole, or cut the file back to where it was and raise."""
        start = self._size
        try:
            write_all(self._fd, data)
        except BaseException as exc:
            with contextlib.suppress(OSError):
                os.ftruncate(self._fd, start)  # never leave a half row behind
            if isinstance(exc, OSError):
                raise write_error(self.path, exc, what="the chunk being written was not saved "
                                  "(finished chunks before it are)") from None
            raise
        self._size = start + len(data)

    def append(self, stats: sinter.TaskStats, *, chunk_id: str | None = None) -> str:
        """Write one finished chunk as one row (flushed now). Returns its chunk id."""
        if self._fd < 0:
            raise ValueError(f"{self.path}: writer is closed")
        chunk = chunk_id or new_chunk_id()
        if "," in chunk or "\n" in chunk or '"' in chunk:
            raise ValueError(f"chunk id {chunk!r} must not contain commas, quotes or newlines")
        self._write((stats.to_csv_line() + "," + chunk + "\n").encode())
        self.rows_written += 1
        now = time.monotonic()
        if now - self._last_sync >= FSYNC_EVERY_S:
            try:
                os.fsync(self._fd)
            except OSError as exc:
                raise write_error(self.path, exc, what="recent chunks may not be on disk") from None
            self._last_sync = now
        return chunk

    def close(self, *, raise_errors: bool = True) -> None:
        if self._fd < 0:
            return
        fd, self._fd = self._fd, -1
        try:
            os.fsync(fd)
        except OSError as exc:
            if raise_errors:
                raise write_error(self.path, exc, what="recent chunks may not be on disk") from None
        finally:
            os.close(fd)  # closing releases the flock
