"""One shard file of the sample store: what it is, its rows, and its repair.

A shard the store created is named ``<stem>.csv`` (stem: letters, digits, ``-`` and ``_``) and
starts with exactly :data:`HEADER`. Only such files are ever modified (a torn last line cut off,
damaged rows set aside); any other CSV is read as a plain sinter file when its header has
sinter's columns, and left alone otherwise.

A line that cannot be read is one of two things:

- *damaged*: what an interrupted or short write leaves behind (NUL bytes, or the torn start of
  one row glued to a whole row written after it). It is never counted; a repair moves it to
  ``<shard>.rejected`` beside the shard, so the shard stays readable by sinter, and the next sweep
  samples the lost shots again.
- *unreadable*: anything else (a string where a number belongs, a missing field, non-UTF-8
  bytes, a huge field, JSON nested too deeply). That may be a person's edit, so it is never
  moved: reading refuses with the file and the line.
"""

from __future__ import annotations

import collections
import csv
import dataclasses
import json
import math
import os
import re
import time
from pathlib import Path

import sinter

from planner.errors import InputError
from planner.store.fileio import atomic_write, fsync_dir, write_all, write_error

HEADER = sinter.CSV_HEADER + ",chunk_id"
HEADER_LINE = (HEADER + "\n").encode()
SHARD_SUFFIX = ".csv"
REJECTED_SUFFIX = ".rejected"
REQUIRED = ("shots", "errors", "discards", "seconds", "decoder", "strong_id", "json_metadata")
#: longest line read as a row; planner's rows are a few hundred bytes
MAX_LINE_BYTES = 1 << 20
_STEM = re.compile(r"[A-Za-z0-9][A-Za-z0-9_-]*\Z")
# where a whole row may start inside a damaged line: shots, errors, discards, seconds
_ROW_START = re.compile(r"(?<! )(?= *\d+, *\d+, *\d+, *[0-9.]+,)")
_TORN_START = re.compile(r" *\d")
_INTS = ("shots", "errors", "discards")


def is_shard_name(name: str) -> bool:
    """Whether ``name`` is a file name the store gives its shards.

    >>> is_shard_name("host-12-ab12cd.csv"), is_shard_name("shard-2-of-8.csv"), is_shard_name("my data.csv")
    (True, True, False)
    """
    return name.endswith(SHARD_SUFFIX) and bool(_STEM.match(name[: -len(SHARD_SUFFIX)]))


def rejected_path(shard: Path) -> Path:
    """Where a repair sets the damaged rows of ``shard`` aside."""
    return shard.with_name(shard.name + REJECTED_SUFFIX)


def file_kind(path: Path) -> str:
    """``"shard"`` (created by the store: name and header), ``"sinter"`` (another CSV with
    sinter's columns: read, never modified), ``"foreign"`` (neither: ignored, never modified) or
    ``"missing"`` (gone since it was listed)."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(64 * 1024)
    except FileNotFoundError:
        return "missing"  # removed since it was listed
    except OSError:
        return "foreign"
    nl = head.find(b"\n")
    if nl < 0:  # empty, or a header still being written (or torn by a kill while it was)
        return "shard" if is_shard_name(path.name) and HEADER_LINE.startswith(head) else "foreign"
    if head[: nl + 1] == HEADER_LINE and is_shard_name(path.name):
        return "shard"
    try:
        columns = {c.strip() for c in next(csv.reader([head[:nl].decode("utf-8")]))}
    except (UnicodeDecodeError, csv.Error, StopIteration):
        return "foreign"
    return "sinter" if set(REQUIRED) <= columns else "foreign"


@dataclasses.dataclass(frozen=True)
class SampleRow:
    """One finished chunk as stored: its stats, its chunk id, and where it was read."""

    stats: sinter.TaskStats
    chunk_id: str
    shard: Path
    line: int


@dataclasses.dataclass(frozen=True)
class ShardScan:
    """Every complete line of one shard, sorted: rows read, damaged lines (line number, byte
    start, byte end) and unreadable lines (line number, why)."""

    rows: tuple[SampleRow, ...]
    damaged: tuple[tuple[int, int, int], ...]
    unreadable: tuple[tuple[int, str], ...]
    complete_bytes: int

    def refuse_unreadable(self, path: Path) -> None:
        if self.unreadable:
            line, why = self.unreadable[0]
            raise InputError(f"{path}:{line}: unreadable sample row: {why}; fix or delete that "
                             "line (a row that cannot be read is never counted)")


def _count(fields: dict[str, str], key: str) -> int:
    text = fields[key].strip()
    try:
        value = int(text)
    except ValueError:
        raise ValueError(f"{key} {text[:40]!r} is not a whole number") from None
    if value < 0:
        raise ValueError(f"{key} {value} is negative")
    return value


def _json(fields: dict[str, str], key: str) -> object:
    try:
        return json.loads(fields[key])
    except RecursionError:
        raise ValueError(f"{key} is JSON nested too deeply") from None
    except json.JSONDecodeError as exc:
        raise ValueError(f"{key} is not valid JSON ({exc.msg})") from None


def parse_fields(fields: dict[str, str]) -> sinter.TaskStats:
    """TaskStats from the fields of one CSV row (ValueError saying what is wrong).

    >>> s = parse_fields({"shots": " 10", "errors": "2", "discards": "0", "seconds": "0.5",
    ...                   "decoder": "pymatching", "strong_id": "ab", "json_metadata": "{}"})
    >>> (s.shots, s.errors)
    (10, 2)
    """
    shots, errors, discards = (_count(fields, k) for k in _INTS)
    text = fields["seconds"].strip()
    try:
        seconds = float(text)
    except ValueError:
        raise ValueError(f"seconds {text[:40]!r} is not a number") from None
    if not (math.isfinite(seconds) and seconds >= 0):
        raise ValueError(f"seconds {text[:40]!r} is not a finite number >= 0")
    if shots < errors + discards:
        raise ValueError(f"shots {shots} is less than errors + discards ({errors} + {discards})")
    meta = _json(fields, "json_metadata")
    if meta is not None and not isinstance(meta, (int, float, str, dict, list)):
        raise ValueError("json_metadata is not a JSON value sinter accepts")
    counts: collections.Counter[str] = collections.Counter()
    if (fields.get("custom_counts") or "").strip():
        doc = _json(fields, "custom_counts")
        if not (isinstance(doc, dict) and all(isinstance(v, int) and not isinstance(v, bool)
                                              for v in doc.values())):
            raise ValueError("custom_counts is not an object of whole numbers")
        counts = collections.Counter(doc)
    return sinter.TaskStats(shots=shots, errors=errors, discards=discards, seconds=seconds,
                            decoder=fields["decoder"], strong_id=fields["strong_id"],
                            json_metadata=meta, custom_counts=counts)


def parse_line(raw: bytes, header: list[str]) -> tuple[sinter.TaskStats, str] | str:
    """(stats, chunk id or "") of one line without its newline, or why it cannot be read."""
    if len(raw) > MAX_LINE_BYTES:
        return f"the line is {len(raw):,} bytes long (a sample row is at most {MAX_LINE_BYTES:,})"
    if b"\x00" in raw:
        return "the line holds NUL bytes"
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        return f"not UTF-8 text (byte {exc.start + 1} of the line)"
    try:
        values = next(csv.reader([text], strict=True))
    except (csv.Error, StopIteration) as exc:
        return f"not a CSV row ({exc})"
    if len(values) != len(header):
        return f"{len(values)} fields where the header has {len(header)}"
    fields = dict(zip(header, values, strict=True))
    try:
        stats = parse_fields(fields)
    except ValueError as exc:
        return str(exc)
    return stats, (fields.get("chunk_id") or "").strip()


def looks_damaged(raw: bytes, header: list[str]) -> bool:
    """Whether an unreadable line is what a torn write leaves: NUL bytes, or the start of one row
    followed by a whole row (the next row appended after a short write)."""
    if b"\x00" in raw:
        return True
    if len(raw) > MAX_LINE_BYTES:
        return False
    text = raw.decode("utf-8", errors="replace")
    if not _TORN_START.match(text):  # a torn row starts as every row does: padded shots
        return False
    for m in _ROW_START.finditer(text):
        if m.start() > 0 and not isinstance(parse_line(text[m.start():].encode(), header), str):
            return True
    return False


def scan_shard(path: Path, data: bytes | None = None) -> ShardScan:
    """Read every complete line of a shard (``data``: its bytes, if already read). A torn last
    line (no newline yet: a write in flight or killed) is not a row and is left out."""
    if data is None:
        data = path.read_bytes()
    end = data.rfind(b"\n") + 1
    if end == 0:
        return ShardScan((), (), (), 0)
    nl = data.find(b"\n")
    try:
        header = [h.strip() for h in next(csv.reader([data[:nl].decode("utf-8")], strict=True))]
    except (UnicodeDecodeError, csv.Error, StopIteration):
        raise InputError(f"{path}:1: not a sample file (the header is not a CSV line)") from None
    missing = [k for k in REQUIRED if k not in header]
    if missing:
        raise InputError(f"{path}: not a sample file (header lacks {', '.join(missing)})")
    rows: list[SampleRow] = []
    damaged: list[tuple[int, int, int]] = []
    unreadable: list[tuple[int, str]] = []
    pos, line_no = nl + 1, 2
    while pos < end:
        stop = data.index(b"\n", pos)
        raw = data[pos:stop]
        if raw.strip():
            got = parse_line(raw, header)
            if not isinstance(got, str):
                stats, chunk = got
                # rows of plain sinter files have no chunk id: name them by place so they count once
                rows.append(SampleRow(stats=stats, chunk_id=chunk or f"{path.name}:{line_no}",
                                      shard=path, line=line_no))
            elif looks_damaged(raw, header):
                damaged.append((line_no, pos, stop + 1))
            else:
                unreadable.append((line_no, got))
        pos, line_no = stop + 1, line_no + 1
    return ShardScan(tuple(rows), tuple(damaged), tuple(unreadable), end)


def read_shard(path: Path) -> list[SampleRow]:
    """Rows of one shard: a torn last line and damaged lines are skipped, an unreadable line is
    an InputError naming the file and the line."""
    scan = scan_shard(Path(path))
    scan.refuse_unreadable(Path(path))
    return list(scan.rows)


def _lines_text(lines: list[int]) -> str:
    shown = ", ".join(str(n) for n in lines[:5])
    return f"line{'s' if len(lines) > 1 else ''} {shown}{', ...' if len(lines) > 5 else ''}"


def damaged_notice(path: Path, lines: list[int], *, moved: bool) -> str:
    where = rejected_path(path).name
    if moved:
        return (f"{path}: set aside {len(lines)} damaged row(s) ({_lines_text(lines)}, left by an "
                f"interrupted write) in {where}; their shots are not counted and a sweep samples "
                "them again")
    return (f"{path}: skipped {len(lines)} damaged row(s) ({_lines_text(lines)}, left by an "
            f"interrupted write); the next sweep sets them aside in {where}")


@dataclasses.dataclass(frozen=True)
class Repair:
    """What :func:`repair_locked` did: bytes removed from the shard, rows set aside, whether the
    shard was replaced by a new file (the caller's descriptor then points at the old one)."""

    removed_bytes: int = 0
    set_aside: tuple[int, ...] = ()
    replaced: bool = False
    notice: str | None = None


def _read_fd(fd: int) -> bytes:
    size = os.fstat(fd).st_size
    parts, pos = [], 0
    while pos < size:
        chunk = os.pread(fd, size - pos, pos)
        if not chunk:
            break
        parts.append(chunk)
        pos += len(chunk)
    return b"".join(parts)


def _set_aside(path: Path, data: bytes, damaged: tuple[tuple[int, int, int], ...]) -> None:
    side = rejected_path(path)
    stamp = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())
    lines = [n for n, _, _ in damaged]
    note = f"# planner set these rows of {path.name} aside on {stamp} ({_lines_text(lines)})\n"
    payload = note.encode() + b"".join(data[a:b] for _, a, b in damaged)
    fd = os.open(side, os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o644)
    try:
        start = os.fstat(fd).st_size
        try:
            write_all(fd, payload)
            os.fsync(fd)
        except OSError as exc:
            try:
                os.ftruncate(fd, start)
            except OSError:
                pass
            raise write_error(side, exc, what="the damaged rows stay in the shard") from None
    finally:
        os.close(fd)


def _replace_contents(fd: int, path: Path, data: bytes) -> None:
    atomic_write(path, data, mode=os.fstat(fd).st_mode & 0o777, unchanged="the shard is unchanged")
    fsync_dir(path.parent)


def repair_locked(fd: int, path: Path) -> Repair:
    """Repair a shard whose lock the caller holds (``fd`` open on ``path``): cut a torn last line
    off, and move damaged rows to ``<shard>.rejected``. A file that is not a store shard (see
    :func:`file_kind`) is never touched; unreadable rows are left for the reader to refuse."""
    try:
        return _repair_locked(fd, path)
    except OSError as exc:
        raise write_error(path, exc, what="the shard was not repaired") from None


def _repair_locked(fd: int, path: Path) -> Repair:
    data = _read_fd(fd)
    if not data:
        return Repair()
    if data.find(b"\n") < 0:  # a header torn by a kill: nothing of value yet
        if HEADER_LINE.startswith(data) and is_shard_name(path.name):
            os.ftruncate(fd, 0)
            return Repair(removed_bytes=len(data))
        return Repair()
    if not data.startswith(HEADER_LINE) or not is_shard_name(path.name):
        return Repair()
    scan = scan_shard(path, data)
    if not scan.damaged:
        if scan.complete_bytes != len(data):
            os.ftruncate(fd, scan.complete_bytes)
            os.fsync(fd)
        return Repair(removed_bytes=len(data) - scan.complete_bytes)
    _set_aside(path, data, scan.damaged)  # first, so a crash in between loses nothing
    lines = [n for n, _, _ in scan.damaged]
    notice = damaged_notice(path, lines, moved=True)
    first = scan.damaged[0][1]
    tail_only = all(b == a2 for (_, _, b), (_, a2, _) in zip(scan.damaged, scan.damaged[1:]))
    if tail_only and scan.damaged[-1][2] == scan.complete_bytes:
        os.ftruncate(fd, first)  # damaged rows at the end: cutting them is enough
        os.fsync(fd)
        return Repair(removed_bytes=len(data) - first, set_aside=tuple(lines), notice=notice)
    keep, pos = [], 0
    for _, a, b in scan.damaged:
        keep.append(data[pos:a])
        pos = b
    keep.append(data[pos:scan.complete_bytes])
    kept = b"".join(keep)
    _replace_contents(fd, path, kept)
    return Repair(removed_bytes=len(data) - len(kept), set_aside=tuple(lines), replaced=True,
                  notice=notice)
