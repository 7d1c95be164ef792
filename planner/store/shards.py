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
- the store modifies only files it created (name and header, see :mod:`planner.store.shardfile`):
  a torn last line (a writer killed inside ``write``) is cut off, and a damaged row mid-file
  is moved to ``<shard>.rejected``. Other CSV files are read as plain sinter files or ignored,
  never modified. Things worth knowing (rows ignored or set aside, files ignored) are told
  through ``notify`` (default: one line on stderr) and kept in ``SampleStore.notices``.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import secrets
import socket
import sys
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import sinter

from planner.errors import InputError
from planner.sampling.work import new_chunk_id, sharded_name
from planner.store.manifest import MANIFEST, Manifest, read_manifest
from planner.store.shardfile import (
    HEADER,
    SHARD_SUFFIX,
    SampleRow,
    damaged_notice,
    file_kind,
    is_shard_name,
    read_shard,
    repair_locked,
    scan_shard,
)
from planner.store.writer import ShardWriter, is_open_on, try_lock

if TYPE_CHECKING:
    from planner.config import Target

__all__ = ["HEADER", "SampleRow", "SampleStore", "ShardWriter", "StoreRead", "default_shard_name",
           "new_chunk_id", "print_notice", "read_shard", "sharded_name"]

Notify = Callable[[str], None]


def print_notice(message: str) -> None:
    """The default ``notify``: one line on stderr."""
    print(f"planner: note: {message}", file=sys.stderr)


def default_shard_name() -> str:
    """``<host>-<pid>-<random>``: unique per writer, readable in a listing."""
    host = socket.gethostname().split(".")[0] or "host"
    host = "".join(ch if ch.isalnum() and ch.isascii() or ch in "-_" else "_" for ch in host)
    return f"{host.lstrip('-_') or 'host'}-{os.getpid()}-{secrets.token_hex(3)}"


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


def _row_kind(row: SampleRow, wanted: set[str] | None, retired: set[str], seen: set[str]) -> str:
    """Whether a row is read ("keep"), a repeat of a chunk ("duplicate"), a task the sweep no
    longer lists ("aside") or a task of another sweep ("ignored")."""
    sid = row.stats.strong_id
    if wanted is not None and sid not in wanted:
        return "aside" if sid in retired else "ignored"
    return "duplicate" if row.chunk_id in seen else "keep"


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
        if self.samples_dir != self.root or self.root.name == "samples":
            return self.samples_dir.parent / MANIFEST
        return self.root / MANIFEST

    def task_ids(self) -> set[str] | None:
        """Strong ids the manifest lists (None without a manifest: every row is read)."""
        manifest = read_manifest(self.manifest_path.parent)
        return None if manifest is None else manifest.strong_ids

    def _wanted(self) -> tuple[set[str] | None, set[str]]:
        """The manifest's task ids (None: no manifest) and its retired tasks' ids."""
        manifest = read_manifest(self.manifest_path.parent)
        if manifest is None:
            return None, set()
        return manifest.strong_ids, manifest.retired_ids

    @property
    def out_dir(self) -> Path:
        """The out directory a sweep into this store locks and records its manifest in."""
        return self.root if self.samples_dir != self.root else self.samples_dir.parent

    def sampling_lock(self, *, shared: bool = False) -> contextlib.AbstractContextManager[contextlib.ExitStack]:
        """Hold the out directory's sampling lock (see :func:`planner.store.outdir.sampling_lock`)."""
        from planner.store.outdir import sampling_lock

        return sampling_lock(self.out_dir, shared=shared)

    def prepare_sweep(self, *, target: Target, tasks: Sequence[sinter.Task], budget: str | None,
                      max_errors: int | None, max_shots: int | None) -> Manifest:
        """Write (or check) the out directory's manifest and target copy for a sweep of ``tasks``."""
        from planner.store.outdir import prepare_sweep_dir

        return prepare_sweep_dir(self.out_dir, target=target, tasks=tasks, budget=budget,
                                 max_errors=max_errors, max_shots=max_shots, notify=self.note)

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
        wanted, retired = (None, set()) if all_tasks else self._wanted()
        files = self._csv_files()
        sample_files = self.shard_files()
        seen: set[str] = set()
        rows: list[SampleRow] = []
        ignored = damaged = duplicates = aside = 0
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
                kind = _row_kind(row, wanted, retired, seen)
                if kind == "ignored":
                    ignored += 1
                elif kind == "aside":
                    aside += 1
                elif kind == "duplicate":
                    duplicates += 1
                else:
                    seen.add(row.chunk_id)
                    rows.append(row)
        if ignored:
            self.note(f"{self.samples_dir}: ignored {ignored} row(s) of tasks that "
                      f"{self.manifest_path} does not list (samples of another target or sweep)")
        if aside:
            self.note(f"{self.samples_dir}: {aside} row(s) of tasks no longer in the sweep stay on "
                      "disk, not read (they count again if the sweep lists those tasks again)")
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
                if try_lock(fd) and is_open_on(fd, shard):
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


