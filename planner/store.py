"""The append-only sample store: sinter-compatible CSV shards, one row per finished chunk.

Layout: an out directory keeps its shards in ``DIR/samples/*.csv``. Every shard starts with
``sinter.CSV_HEADER + ",chunk_id"``; every row is ``TaskStats.to_csv_line() + "," + chunk_id``
for one finished chunk of shots. ``sinter.read_stats_from_csv_files`` reads the shards as they
are (it ignores the extra column).

Rules that make the store safe to kill, copy and merge:

- one writer per shard file, enforced with an exclusive non-blocking ``flock``;
- a row is written with a single ``write`` call and flushed at once; fsync every ~2 s and on close;
- a reader sums rows by strong_id and counts each chunk id once, so a shard copied twice or
  merged twice adds nothing;
- a torn last line (a writer killed inside ``write``) is skipped by readers and cut off when a
  writer next opens the store. That truncation is the one rewrite the store ever does: the torn
  bytes are not a finished chunk, and leaving them would make the next appended row unparsable
  (and sinter's reader fail).
"""

from __future__ import annotations

import collections
import contextlib
import csv
import dataclasses
import errno
import fcntl
import io
import json
import os
import secrets
import socket
import time
from collections.abc import Iterator
from pathlib import Path

import sinter

from planner.errors import InputError

HEADER = sinter.CSV_HEADER + ",chunk_id"
SHARD_SUFFIX = ".csv"
FSYNC_EVERY_S = 2.0
_REQUIRED = ("shots", "errors", "discards", "seconds", "decoder", "strong_id", "json_metadata")


def new_chunk_id() -> str:
    """A fresh, globally unique chunk id (128 random bits, hex).

    >>> len(new_chunk_id()), new_chunk_id() != new_chunk_id()
    (32, True)
    """
    return secrets.token_hex(16)


def default_shard_name() -> str:
    """``<host>-<pid>-<random>``: unique per writer, readable in a listing."""
    host = socket.gethostname().split(".")[0] or "host"
    host = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in host)
    return f"{host}-{os.getpid()}-{secrets.token_hex(3)}"


def sharded_name(*, index: int, count: int) -> str:
    """Shard file stem for job ``index`` of ``count`` (1-based).

    >>> sharded_name(index=2, count=8)
    'shard-2-of-8'
    """
    return f"shard-{index}-of-{count}"


@dataclasses.dataclass(frozen=True)
class SampleRow:
    """One finished chunk as stored: its stats, its chunk id, and where it was read."""

    stats: sinter.TaskStats
    chunk_id: str
    shard: Path
    line: int


def _parse_row(fields: dict[str, str]) -> sinter.TaskStats:
    custom = fields.get("custom_counts") or ""
    return sinter.TaskStats(
        shots=int(fields["shots"]),
        errors=int(fields["errors"]),
        discards=int(fields["discards"]),
        seconds=float(fields["seconds"]),
        decoder=fields["decoder"],
        strong_id=fields["strong_id"],
        json_metadata=json.loads(fields["json_metadata"]),
        custom_counts=collections.Counter(json.loads(custom)) if custom else collections.Counter(),
    )


def _complete_prefix(data: bytes) -> tuple[bytes, bool]:
    """Bytes up to the last newline, and whether anything after it (a torn line) was dropped."""
    cut = data.rfind(b"\n") + 1
    return data[:cut], cut != len(data)


def read_shard(path: Path) -> list[SampleRow]:
    """Rows of one shard. A torn last line is skipped; any other bad line is an InputError."""
    data, _torn = _complete_prefix(path.read_bytes())
    if not data:
        return []
    text = data.decode("utf-8", errors="replace")
    reader = csv.reader(io.StringIO(text))
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:
        return []
    missing = [k for k in _REQUIRED if k not in header]
    if missing:
        raise InputError(f"{path}: not a sample file (header lacks {', '.join(missing)})")
    rows = []
    for line_no, values in enumerate(reader, start=2):
        if not values:
            continue
        fields = dict(zip(header, values, strict=False))
        try:
            stats = _parse_row(fields)
        except (KeyError, ValueError, TypeError, AssertionError) as exc:
            raise InputError(f"{path}:{line_no}: unreadable sample row ({exc})") from None
        # rows from plain sinter files have no chunk id: name them by place so they count once
        chunk = (fields.get("chunk_id") or "").strip() or f"{path.name}:{line_no}"
        rows.append(SampleRow(stats=stats, chunk_id=chunk, shard=path, line=line_no))
    return rows


def _last_line_is_bad(data: bytes) -> bool:
    """Whether the last complete line of shard bytes fails to parse (e.g. NULs after a crash)."""
    body = data.rstrip(b"\n")
    start = body.rfind(b"\n") + 1
    if start == 0:  # only the header
        return not body.decode("utf-8", errors="replace").startswith(HEADER.split(",")[0])
    head = data[: data.find(b"\n")].decode("utf-8", errors="replace")
    try:
        values = next(csv.reader([body[start:].decode("utf-8")]))
        _parse_row(dict(zip([h.strip() for h in next(csv.reader([head]))], values, strict=False)))
    except (StopIteration, KeyError, ValueError, TypeError, AssertionError, UnicodeDecodeError):
        return True
    return False


def repair_tail(fd: int, path: Path) -> int:
    """Cut a torn or unparsable last line off a shard whose lock the caller holds.

    Returns the number of bytes removed (0 when the file was whole).
    """
    size = os.fstat(fd).st_size
    with open(path, "rb") as fh:
        data = fh.read(size)
    keep, _ = _complete_prefix(data)
    if keep and _last_line_is_bad(keep):
        keep = keep[: keep.rstrip(b"\n").rfind(b"\n") + 1]
    if len(keep) != size:
        os.ftruncate(fd, len(keep))
        os.fsync(fd)
    return size - len(keep)


def _try_lock(fd: int) -> bool:
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
            return False
        raise
    return True


class ShardWriter:
    """Appends rows to one shard file while holding its lock. Use via :meth:`SampleStore.writer`."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self._fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        if not _try_lock(self._fd):
            os.close(self._fd)
            raise InputError(f"{path}: another writer holds this shard (locked); use another "
                             "shard or wait for it to finish")
        self.repaired_bytes = repair_tail(self._fd, path)
        if os.fstat(self._fd).st_size == 0:
            os.write(self._fd, (HEADER + "\n").encode())
        self._last_sync = time.monotonic()
        self.rows_written = 0

    def append(self, stats: sinter.TaskStats, *, chunk_id: str | None = None) -> str:
        """Write one finished chunk as one row (flushed now). Returns its chunk id."""
        if self._fd < 0:
            raise ValueError(f"{self.path}: writer is closed")
        chunk = chunk_id or new_chunk_id()
        if "," in chunk or "\n" in chunk or '"' in chunk:
            raise ValueError(f"chunk id {chunk!r} must not contain commas, quotes or newlines")
        # one write call per row: a kill leaves either the whole row or a torn tail, never a mix
        os.write(self._fd, (stats.to_csv_line() + "," + chunk + "\n").encode())
        self.rows_written += 1
        now = time.monotonic()
        if now - self._last_sync >= FSYNC_EVERY_S:
            os.fsync(self._fd)
            self._last_sync = now
        return chunk

    def close(self) -> None:
        if self._fd >= 0:
            try:
                os.fsync(self._fd)
            finally:
                os.close(self._fd)  # closing releases the flock
                self._fd = -1


class SampleStore:
    """The sample shards of one out directory (``root/samples``) or of a shard directory.

    ``root`` may be an out directory (shards live in ``root/samples/``), a directory named
    ``samples``, or a bare directory of shard files (no ``samples/`` inside, no manifest). An
    out directory also holds report CSVs (requirements.csv, ...): those are never shards.
    """

    def __init__(self, root: Path | str) -> None:
        root = Path(root)
        self.root = root
        if root.name == "samples":
            direct = True
        elif (root / "samples").is_dir() or (root / "manifest.json").exists():
            direct = False
        else:
            direct = root.is_dir() and any(root.glob("*" + SHARD_SUFFIX))
        self.samples_dir = root if direct else root / "samples"

    def shard_files(self) -> list[Path]:
        if not self.samples_dir.is_dir():
            return []
        return sorted(self.samples_dir.glob("*" + SHARD_SUFFIX))

    def rows(self) -> Iterator[SampleRow]:
        """Every stored row of every shard, duplicate chunk ids dropped (first one kept)."""
        seen: set[str] = set()
        for shard in self.shard_files():
            for row in read_shard(shard):
                if row.chunk_id not in seen:
                    seen.add(row.chunk_id)
                    yield row

    def chunk_ids(self) -> set[str]:
        return {row.chunk_id for row in self.rows()}

    def stats(self) -> list[sinter.TaskStats]:
        """Totals per strong_id over all shards (each chunk once), in first-seen order."""
        totals: dict[str, sinter.TaskStats] = {}
        for row in self.rows():
            key = row.stats.strong_id
            totals[key] = totals[key] + row.stats if key in totals else row.stats
        return list(totals.values())

    def stats_by_id(self) -> dict[str, sinter.TaskStats]:
        return {s.strong_id: s for s in self.stats()}

    def repair(self) -> int:
        """Cut torn tails off every shard no live writer holds. Returns bytes removed."""
        removed = 0
        for shard in self.shard_files():
            try:
                fd = os.open(shard, os.O_RDWR)
            except OSError:  # a read-only copy: readers skip its torn tail anyway
                continue
            try:
                if _try_lock(fd):
                    removed += repair_tail(fd, shard)
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
        path = self.samples_dir / (name if name.endswith(SHARD_SUFFIX) else name + SHARD_SUFFIX)
        w = ShardWriter(path)
        try:
            self.repair()  # our own shard is locked by us, so this only touches idle shards
            yield w
        finally:
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
    into itself, adds nothing. Rows are copied as parsed and re-written, chunk id kept.
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
    with dest.writer("merged-" + default_shard_name()) as w:
        for row in new:
            w.append(row.stats, chunk_id=row.chunk_id)
        shard = w.path
    return MergeResult(copied_rows=len(new), copied_shots=sum(r.stats.shots for r in new),
                       skipped_rows=skipped, shard=shard)
