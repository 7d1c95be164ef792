"""The append-only sample store: sinter-compatible CSV shards, one row per finished chunk.

Layout: an out directory keeps its shards in ``DIR/samples/*.csv``. Every shard starts with
``sinter.CSV_HEADER + ",chunk_id"``; every row is ``TaskStats.to_csv_line() + "," + chunk_id``
for one finished chunk of shots. ``sinter.read_stats_from_csv_files`` reads the shards as they
are (it ignores the extra column).

Rules that make the store safe to kill, copy and merge:

- one writer per shard file, enforced with an exclusive non-blocking ``flock``;
- a row is written whole (short writes are continued) and flushed at once; a write that fails
  (disk full) is cut back to the row's start and raises, so no half row stays behind;
  fsync every ~2 s and on close;
- a reader sums rows by strong_id and counts each chunk id once, so a shard copied twice or
  merged twice adds nothing; in an out directory it takes only the tasks its manifest lists
  (rows of other tasks are ignored and counted);
- the store modifies only files it created (name and header, see :mod:`planner.shardfile`):
  a torn last line (a writer killed inside ``write``) is cut off, and a damaged row mid-file
  is moved to ``<shard>.rejected``. Other CSV files are read as plain sinter files or ignored,
  never modified. Things worth knowing (rows ignored or set aside, files ignored) are told
  through ``notify`` (default: one line on stderr) and kept in ``SampleStore.notices``.
"""

from __future__ import annotations

import contextlib
import dataclasses
import errno
import fcntl
import os
import secrets
import socket
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import sinter

from planner.errors import InputError
from planner.fileio import remove_quietly, write_all, write_error
from planner.shardfile import (HEADER, HEADER_LINE, SHARD_SUFFIX, SampleRow, damaged_notice, file_kind,
                               is_shard_name, read_shard, repair_locked, scan_shard)

__all__ = ["HEADER", "MergeResult", "SampleRow", "SampleStore", "ShardWriter", "StoreRead",
           "default_shard_name", "merge_into", "new_chunk_id", "print_notice", "read_shard",
           "sharded_name"]

FSYNC_EVERY_S = 2.0
Notify = Callable[[str], None]


def print_notice(message: str) -> None:
    """The default ``notify``: one line on stderr."""
    print(f"planner: note: {message}", file=sys.stderr)


def new_chunk_id() -> str:
    """A fresh, globally unique chunk id (128 random bits, hex).

    >>> len(new_chunk_id()), new_chunk_id() != new_chunk_id()
    (32, True)
    """
    return secrets.token_hex(16)


def default_shard_name() -> str:
    """``<host>-<pid>-<random>``: unique per writer, readable in a listing."""
    host = socket.gethostname().split(".")[0] or "host"
    host = "".join(ch if ch.isalnum() and ch.isascii() or ch in "-_" else "_" for ch in host)
    return f"{host.lstrip('-_') or 'host'}-{os.getpid()}-{secrets.token_hex(3)}"


def sharded_name(*, index: int, count: int) -> str:
    """Shard file stem for job ``index`` of ``count`` (1-based).

    >>> sharded_name(index=2, count=8)
    'shard-2-of-8'
    """
    return f"shard-{index}-of-{count}"


def _try_lock(fd: int) -> bool:
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return False
        raise
    return True


def _is_open_on(fd: int, path: Path) -> bool:
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
        if not _try_lock(fd):
            os.close(fd)
            raise InputError(f"{path}: another writer holds this shard (locked); use another "
                             "shard or wait for it to finish")
        if not _is_open_on(fd, path):
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


@dataclasses.dataclass(frozen=True)
class StoreRead:
    """What one read of a store gave: its rows (each chunk once) and what was left out.

    ``ignored_rows``: rows of tasks the manifest does not list; ``damaged_rows``: rows torn by an
    interrupted write (not counted); ``duplicate_rows``: chunks seen before (copies, merges);
    ``foreign_files``: CSV files in the sample directory that are not sample files.
    """

    rows: tuple[SampleRow, ...]
    ignored_rows: int = 0
    damaged_rows: int = 0
    duplicate_rows: int = 0
    foreign_files: tuple[Path, ...] = ()

    def stats(self) -> list[sinter.TaskStats]:
        """Totals per strong_id, in first-seen order."""
        totals: dict[str, sinter.TaskStats] = {}
        for row in self.rows:
            key = row.stats.strong_id
            totals[key] = totals[key] + row.stats if key in totals else row.stats
        return list(totals.values())


class SampleStore:
    """The sample shards of one out directory (``root/samples``) or of a shard directory.

    ``root`` may be an out directory (shards live in ``root/samples/``), a directory named
    ``samples``, or a bare directory of shard files (no ``samples/`` inside, no manifest). An
    out directory also holds report CSVs (requirements.csv, ...): those are never shards.
    When the out directory has a manifest, only the rows of its tasks are read.

    ``notify``: called with each notice (rows ignored or set aside, files ignored), once per
    store; None to keep quiet (``notices`` lists them either way).
    """

    def __init__(self, root: Path | str, *, notify: Notify | None = print_notice) -> None:
        root = Path(root)
        self.root = root
        if root.name == "samples":
            direct = True
        elif (root / "samples").is_dir() or (root / "manifest.json").exists():
            direct = False
        else:
            direct = root.is_dir() and any(root.glob("*" + SHARD_SUFFIX))
        self.samples_dir = root if direct else root / "samples"
        self.notices: list[str] = []
        self._notify = notify

    def note(self, message: str) -> None:
        if message not in self.notices:
            self.notices.append(message)
            if self._notify is not None:
                self._notify(message)

    @property
    def manifest_path(self) -> Path:
        """Where this store's manifest is (whether or not it exists)."""
        from planner.manifest import MANIFEST

        if self.samples_dir != self.root or self.root.name == "samples":
            return self.samples_dir.parent / MANIFEST
        return self.root / MANIFEST

    def task_ids(self) -> set[str] | None:
        """Strong ids the manifest lists (None without a manifest: every row is read)."""
        from planner.manifest import read_manifest

        manifest = read_manifest(self.manifest_path.parent)
        return None if manifest is None else manifest.strong_ids

    def _csv_files(self) -> list[Path]:
        if not self.samples_dir.is_dir():
            return []
        return sorted(p for p in self.samples_dir.glob("*" + SHARD_SUFFIX) if p.is_file())

    def shard_files(self) -> list[Path]:
        """The sample files: the store's shards and plain sinter CSVs (not other CSV files)."""
        files = []
        for path in self._csv_files():
            kind = file_kind(path)
            if kind == "foreign":
                self.note(f"{path}: not a sample file (no sinter CSV header); ignored and left untouched")
            elif kind != "missing":
                files.append(path)
        return files

    def read(self, *, all_tasks: bool = False) -> StoreRead:
        """Every readable row, each chunk id once (first kept); rows of tasks outside the
        manifest are left out unless ``all_tasks``. An unreadable row is an InputError naming
        the file and the line; a damaged row is skipped (and said)."""
        wanted = None if all_tasks else self.task_ids()
        files = self._csv_files()
        sample_files = self.shard_files()
        seen: set[str] = set()
        rows: list[SampleRow] = []
        ignored = damaged = duplicates = 0
        for path in sample_files:
            try:
                scan = scan_shard(path)
            except FileNotFoundError:  # removed meanwhile (a merge's temporary directory)
                continue
            scan.refuse_unreadable(path)
            if scan.damaged:
                damaged += len(scan.damaged)
                self.note(damaged_notice(path, [n for n, _, _ in scan.damaged], moved=False))
            for row in scan.rows:
                if wanted is not None and row.stats.strong_id not in wanted:
                    ignored += 1
                elif row.chunk_id in seen:
                    duplicates += 1
                else:
                    seen.add(row.chunk_id)
                    rows.append(row)
        if ignored:
            self.note(f"{self.samples_dir}: ignored {ignored} row(s) of tasks that "
                      f"{self.manifest_path} does not list (samples of another target or sweep)")
        foreign = tuple(p for p in files if p not in sample_files and p.exists())
        return StoreRead(rows=tuple(rows), ignored_rows=ignored, damaged_rows=damaged,
                         duplicate_rows=duplicates, foreign_files=foreign)

    def rows(self) -> Iterator[SampleRow]:
        """Every stored row of the manifest's tasks, duplicate chunk ids dropped (first kept)."""
        yield from self.read().rows

    def chunk_ids(self) -> set[str]:
        """Chunk ids of every row, whatever its task (so a merge never copies a chunk twice)."""
        return {row.chunk_id for row in self.read(all_tasks=True).rows}

    def stats(self) -> list[sinter.TaskStats]:
        """Totals per strong_id over all shards (each chunk once), in first-seen order."""
        return self.read().stats()

    def stats_by_id(self) -> dict[str, sinter.TaskStats]:
        return {s.strong_id: s for s in self.stats()}

    def repair(self) -> int:
        """Repair every store shard no live writer holds (torn tails cut, damaged rows set
        aside). Files the store did not create are never touched. Returns bytes removed."""
        removed = 0
        for shard in self._csv_files():
            if file_kind(shard) != "shard":
                continue
            try:
                fd = os.open(shard, os.O_RDWR)
            except OSError:  # a read-only copy: readers skip its torn tail anyway
                continue
            try:
                if _try_lock(fd) and _is_open_on(fd, shard):
                    result = repair_locked(fd, shard)
                    removed += result.removed_bytes
                    if result.notice:
                        self.note(result.notice)
            finally:
                os.close(fd)
        return removed

    @contextlib.contextmanager
    def writer(self, shard: str | None = None) -> Iterator[ShardWriter]:
        """Lock and open shard ``<shard>.csv`` (default: a fresh host-pid-random name) for
        appending; other unlocked shards get their torn tails repaired first."""
        try:
            self.samples_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise InputError(f"{self.samples_dir}: cannot create the sample directory "
                             f"({exc.strerror or exc})") from None
        if not os.access(self.samples_dir, os.W_OK):
            raise InputError(f"{self.samples_dir}: not writable")
        name = shard or default_shard_name()
        name = name if name.endswith(SHARD_SUFFIX) else name + SHARD_SUFFIX
        if not is_shard_name(name):
            raise ValueError(f"shard name {name!r}: use letters, digits, '-' and '_' only")
        w = ShardWriter(self.samples_dir / name, notify=self.note)
        try:
            self.repair()  # our own shard is locked by us, so this only touches idle shards
            yield w
        except BaseException:
            w.close(raise_errors=False)  # the first error is the one to report
            raise
        else:
            w.close()


@dataclasses.dataclass(frozen=True)
class MergeResult:
    """What :func:`merge_into` copied: rows (chunks) and shots new to the destination."""

    copied_rows: int
    copied_shots: int
    skipped_rows: int
    shard: Path | None


def merge_into(dest: SampleStore, sources: list[SampleStore]) -> MergeResult:
    """Copy every row whose chunk id ``dest`` lacks into one new shard of ``dest``.

    Rows already present (same chunk id) are skipped, so merging twice, or merging a directory
    into itself, adds nothing. Rows are copied as parsed and re-written, chunk id kept. A
    source gives only the tasks of its manifest. If writing fails, the new shard is removed.
    """
    have = dest.chunk_ids()
    new: list[SampleRow] = []
    skipped = 0
    for src in sources:
        for row in src.rows():
            if row.chunk_id in have:
                skipped += 1
                continue
            have.add(row.chunk_id)
            new.append(row)
    if not new:
        return MergeResult(copied_rows=0, copied_shots=0, skipped_rows=skipped, shard=None)
    name = "merged-" + default_shard_name()
    shard = dest.samples_dir / (name + SHARD_SUFFIX)  # a fresh name: nobody else's file
    try:
        with dest.writer(name) as w:
            for row in new:
                w.append(row.stats, chunk_id=row.chunk_id)
    except BaseException:
        remove_quietly(shard)  # a half copy is no use: the next merge copies everything again
        raise
    return MergeResult(copied_rows=len(new), copied_shots=sum(r.stats.shots for r in new),
                       skipped_rows=skipped, shard=shard)
