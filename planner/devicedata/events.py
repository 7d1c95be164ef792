"""Measured detection events (and observable flips) in stim's result formats.

Files are read and written by stim's own readers and writers (``stim.read_shot_data_file``,
``stim.write_shot_data_file``) in the formats :data:`FORMATS`. Detection events are kept
bit-packed (one bit per detector, stim's little-endian order: 1M shots of 336 detectors are
42 MB) and unpacked a chunk at a time by :func:`iter_chunks`, so the statistics of a million
shots fit in a few hundred megabytes.

Observable flips live in a sibling file in the same format, ``<stem>.obs<suffix>`` (for
``events.b8``: ``events.obs.b8``), as ``stim detect --obs_out`` keeps them apart: the events
file holds exactly the detectors, which is what an experiment's pipeline writes.

Every way a file can be wrong (missing, empty, truncated, another detector count, another
format) raises :class:`~planner.errors.InputError` naming the file.
"""

from __future__ import annotations

import dataclasses
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import stim

from planner.errors import InputError

__all__ = ["FORMATS", "Events", "iter_chunks", "obs_path_for", "read_events", "write_events"]

#: stim's result formats planner reads and writes
FORMATS: tuple[str, ...] = ("01", "b8", "r8", "ptb64", "dets")


@dataclasses.dataclass(frozen=True)
class Events:
    """Detection events of ``num_shots`` shots: ``packed`` uint8 [shots, ceil(detectors / 8)]
    (stim's bit order), ``observables`` bool [shots, observables] or None when not given."""

    packed: np.ndarray
    num_detectors: int
    observables: np.ndarray | None = None
    source: str = "<memory>"

    @property
    def num_shots(self) -> int:
        return int(self.packed.shape[0])

    def unpacked(self, start: int = 0, stop: int | None = None) -> np.ndarray:
        """uint8 [shots, detectors] (0/1) of shots ``start:stop``."""
        return np.unpackbits(self.packed[start:stop], axis=1, count=self.num_detectors, bitorder="little")

    @classmethod
    def from_bool(cls, detectors: np.ndarray, observables: np.ndarray | None = None, *,
                  source: str = "<memory>") -> Events:
        """From stim's sampler output: bool [shots, detectors] (and [shots, observables])."""
        det = np.asarray(detectors, dtype=bool)
        packed = np.packbits(det, axis=1, bitorder="little")
        obs = None if observables is None else np.asarray(observables, dtype=bool)
        return cls(packed=packed, num_detectors=det.shape[1], observables=obs, source=source)


def obs_path_for(path: str | Path) -> Path:
    """The sibling file of observable flips: ``events.b8`` -> ``events.obs.b8``.

    >>> str(obs_path_for("data/events.b8")), str(obs_path_for("shots"))
    ('data/events.obs.b8', 'shots.obs')
    """
    p = Path(path)
    return p.with_name(f"{p.stem}.obs{p.suffix}") if p.suffix else p.with_name(f"{p.name}.obs")


def check_format(fmt: str) -> str:
    f = (fmt or "").strip().lower()
    if f not in FORMATS:
        raise InputError(f"{fmt!r} is not a result format", field="format", allowed=", ".join(FORMATS))
    return f


def write_events(path: str | Path, detectors: np.ndarray, observables: np.ndarray | None = None, *,
                 fmt: str = "b8") -> list[Path]:
    """Write bool [shots, detectors] to ``path`` (and observables to :func:`obs_path_for`) in
    ``fmt``; returns the files written. ptb64 needs a multiple of 64 shots."""
    fmt = check_format(fmt)
    path = Path(path)
    if fmt == "ptb64" and detectors.shape[0] % 64:
        raise InputError(f"{detectors.shape[0]} shots: ptb64 stores shots in groups of 64",
                         field="shots", allowed="a multiple of 64")
    written = []
    for p, data, kind in ((path, detectors, "num_detectors"), (obs_path_for(path), observables, "num_observables")):
        if data is None:
            continue
        width = {"num_detectors": data.shape[1]} if kind == "num_detectors" or fmt != "dets" else {
            "num_detectors": 0, "num_observables": data.shape[1]}
        stim.write_shot_data_file(data=np.asarray(data, dtype=bool), path=str(p), format=fmt, **width)
        written.append(p)
    return written


def read_events(path: str | Path, *, num_detectors: int, fmt: str = "b8", num_observables: int = 0,
                obs_path: str | Path | None = None) -> Events:
    """Read detection events for a circuit of ``num_detectors`` detectors (and the observable
    flips from ``obs_path``, default the sibling file when it exists)."""
    fmt = check_format(fmt)
    path = Path(path)
    packed = _read_packed(path, fmt=fmt, width=num_detectors, what="detectors")
    obs = None
    o = Path(obs_path) if obs_path is not None else obs_path_for(path)
    if num_observables and (obs_path is not None or o.exists()):
        obs_packed = _read_packed(o, fmt=fmt, width=num_observables, what="observables")
        if obs_packed.shape[0] != packed.shape[0]:
            raise InputError(f"{obs_packed.shape[0]} shots of observable flips for "
                             f"{packed.shape[0]} shots of detection events", source=str(o))
        obs = np.unpackbits(obs_packed, axis=1, count=num_observables, bitorder="little").astype(bool)
    return Events(packed=packed, num_detectors=num_detectors, observables=obs, source=str(path))


def _read_packed(path: Path, *, fmt: str, width: int, what: str) -> np.ndarray:
    src = str(path)
    if not path.exists():
        raise InputError("no such file", source=src)
    if path.is_dir():
        raise InputError("is a directory, expected a file of detection events", source=src)
    size = path.stat().st_size
    if size == 0:
        raise InputError(f"empty: no shots of {what}", source=src)
    _check_size(path, fmt=fmt, width=width, size=size, what=what)
    # in the dets format observables are written "L0", detectors "D0"
    counts = {"num_observables": width} if (fmt == "dets" and what == "observables") else {"num_detectors": width}
    try:
        data = stim.read_shot_data_file(path=src, format=fmt, bit_packed=True, **counts)
    except (ValueError, RuntimeError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(f"not {fmt} data of {width} {what} per shot ({first})",
                         allowed=f"the circuit's {width} {what} per shot, in the format given by --format",
                         source=src) from None
    if data.shape[0] == 0:
        raise InputError(f"no shots of {what}", source=src)
    if width % 8 and np.any(data[:, -1] >> (width % 8)):
        raise InputError(f"bits set beyond the {width} {what} of a shot: another detector count "
                         f"or another format", allowed=f"{fmt} records of {width} bits", source=src)
    if fmt == "r8":
        _check_r8_length(data, width=width, size=size, src=src, what=what)
    return data


def _check_size(path: Path, *, fmt: str, width: int, size: int, what: str) -> None:
    """What stim's readers accept silently: a b8 file cut mid-record, text cut mid-line."""
    record = (width + 7) // 8
    if fmt == "b8" and size % record:
        raise InputError(f"{size} bytes is not a whole number of {record}-byte records of {width} "
                         f"{what}: truncated, another detector count, or another format",
                         allowed=f"b8 records of {width} bits", source=str(path))
    if fmt in ("01", "dets"):
        with path.open("rb") as f:
            head = f.read(65536)
            f.seek(size - 1)
            last = f.read(1)
        text = head.translate(None, b"01\n\r") == b"" if fmt == "01" else head.startswith(b"shot")
        if not text:
            raise InputError(f"not {fmt} data: {'only 0, 1 and newlines' if fmt == '01' else 'lines'} "
                             f"{'are' if fmt == '01' else 'starting with shot are'} expected (another format?)",
                             allowed="--format 01, b8, r8, ptb64 or dets as written", source=str(path))
        if last != b"\n":
            raise InputError("truncated: the last line does not end", source=str(path))


def _check_r8_length(data: np.ndarray, *, width: int, size: int, src: str, what: str) -> None:
    """r8 has no record boundaries to check: write the shots read back and compare sizes."""
    fd, tmp = tempfile.mkstemp(suffix=".r8")
    os.close(fd)
    try:
        bits = np.unpackbits(data, axis=1, count=width, bitorder="little").astype(bool)
        stim.write_shot_data_file(data=bits, path=tmp, format="r8", num_detectors=width)
        if os.path.getsize(tmp) != size:
            raise InputError(f"truncated or not r8 data of {width} {what} per shot", source=src)
    finally:
        os.unlink(tmp)


def iter_chunks(events: Events, *, chunk: int) -> Iterator[tuple[int, np.ndarray]]:
    """(start, uint8 [n, detectors]) for consecutive chunks of at most ``chunk`` shots."""
    for start in range(0, events.num_shots, chunk):
        yield start, events.unpacked(start, start + chunk)
