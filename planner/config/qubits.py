"""Per-qubit and per-pair errors of a target: inline TOML tables and CSV files, read and checked.

A target may give, beside the component values, each qubit's own values and each coupled pair's
own two-qubit error, keyed by the qubit coordinates of planner's circuits (``planner layout``
prints them)::

    [device.qubits]                 # per-qubit overrides, keyed "x,y"
    "3,3" = { readout = 0.04, gate_1q = 2e-3 }
    [device.pairs]                  # per-pair two-qubit errors, keyed "x1,y1-x2,y2" (order-free)
    "2,2-3,3" = { gate_2q = 0.02 }

or ``device.qubit_table = "file.csv"`` (columns ``x,y`` then any of :data:`QUBIT_FIELDS`; an
empty cell is the component value) and ``device.pair_table = "file.csv"`` (columns
``x1,y1,x2,y2`` then ``gate_2q`` or ``gate_2q_infidelity``), paths relative to the target file.
A qubit or a pair that is not listed uses the component value. Where a CSV table and an inline
table give the same qubit, the inline values win, field by field (a table plus a tweak).

Values are checked like the component values (probabilities within their limits, times > 0,
finite numbers); the coherence check (T2 <= 2 T1, with the component value standing in for a
missing one) runs with the other checks across keys. Which coordinates are qubits of the code is
the circuits' business (this module knows nothing about stim): coordinates that are no qubit of
the code at any distance are refused when a circuit is built; coordinates of a larger patch than
the one built are ignored there (a d = 7 chip's table works at d = 3).

>>> qubit_key("3, 3"), pair_key("3,3-2,2")
('3,3', '2,2-3,3')
"""

from __future__ import annotations

import csv
import difflib
import io
import math
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

from pydantic import BaseModel, Field, Strict

from planner.config.limits import ERROR_LIMITS, coherence_problem
from planner.config.types import Frozen, Number
from planner.errors import InputError

if TYPE_CHECKING:
    from planner.config.schema import Target

#: Per-qubit fields, in the order tables list them (the ``*_infidelity`` one converts like the
#: component's, r = p D / (D + 1)).
QUBIT_FIELDS: tuple[str, ...] = ("gate_1q", "gate_1q_infidelity", "readout", "reset", "t1_us", "t2_us",
                                 "idle_excess", "idle_measure_excess")
PAIR_FIELDS: tuple[str, ...] = ("gate_2q", "gate_2q_infidelity")
#: Columns a qubit table may carry and that are not values: what ``planner layout --csv`` adds,
#: so its output can be pasted back as a table.
LAYOUT_COLUMNS: tuple[str, ...] = ("index", "role", "neighbours")
#: Largest table (rows): a d = 101 patch has 20,401 qubits.
MAX_TABLE_ROWS = 100_000
MAX_TABLE_BYTES = 16 * 2**20

_Number = Number
_Frozen = Frozen


class QubitValues(_Frozen):
    """One qubit's own values; None is the component value."""

    gate_1q: _Number | None = None
    gate_1q_infidelity: _Number | None = None
    readout: _Number | None = None
    reset: _Number | None = None
    t1_us: _Number | None = None
    t2_us: _Number | None = None
    idle_excess: _Number | None = None
    idle_measure_excess: _Number | None = None


class PairValues(_Frozen):
    """One coupled pair's own two-qubit error (a Pauli probability or an RB infidelity)."""

    gate_2q: _Number | None = None
    gate_2q_infidelity: _Number | None = None


#: Fields a spread can be stated for: the per-qubit fields without the infidelities, and gate_2q.
SPREAD_FIELDS: tuple[str, ...] = ("gate_1q", "gate_2q", "readout", "reset", "t1_us", "t2_us",
                                  "idle_excess", "idle_measure_excess")
_Sigma = Annotated[float, Strict(), Field(ge=0.0, le=3.0, allow_inf_nan=False)]


class Spread(_Frozen):
    """``[device.spread]``: the qubit-to-qubit spread of each value, as the sigma of a
    log-normal factor (0.3: a typical qubit is within x/ 1.35 of the value; the median stays the
    value). Used only by ``planner spread``; it changes no sampled circuit."""

    gate_1q: _Sigma = 0.0
    gate_2q: _Sigma = 0.0
    readout: _Sigma = 0.0
    reset: _Sigma = 0.0
    t1_us: _Sigma = 0.0
    t2_us: _Sigma = 0.0
    idle_excess: _Sigma = 0.0
    idle_measure_excess: _Sigma = 0.0

    def sigmas(self) -> dict[str, float]:
        return {f: float(getattr(self, f)) for f in SPREAD_FIELDS}


def spread_keys(raw: object) -> object:
    """``[device.spread]``'s keys checked (an unknown one suggests the nearest field); the values
    are checked by :class:`Spread`."""
    if isinstance(raw, Mapping):
        for name in raw:
            if name not in SPREAD_FIELDS:
                near = difflib.get_close_matches(str(name), SPREAD_FIELDS, n=1, cutoff=0.5)
                hint = f"; did you mean '{near[0]}'?" if near else ""
                raise ValueError(f"{name}: unknown field{hint} (fields: {', '.join(SPREAD_FIELDS)})")
    return raw


# ---------------------------------------------------------------------------------------------
# keys


def _coordinate(text: str, *, what: str) -> tuple[float, float]:
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 2:
        raise ValueError(f"{what} {text!r} is not 'x,y' (two coordinates, as `planner layout` prints them)")
    try:
        x, y = (float(p) for p in parts)
    except ValueError:
        raise ValueError(f"{what} {text!r} is not 'x,y' with numbers x and y") from None
    if not (math.isfinite(x) and math.isfinite(y)) or x < 0 or y < 0:
        raise ValueError(f"{what} {text!r}: coordinates are finite numbers >= 0")
    return x + 0.0, y + 0.0


def _coord_text(xy: tuple[float, float]) -> str:
    return f"{xy[0]:g},{xy[1]:g}"


def qubit_key(text: str) -> str:
    """The canonical form of a qubit key ("x,y"); ValueError for one that is not."""
    return _coord_text(_coordinate(text, what="qubit"))


def pair_key(text: str) -> str:
    """The canonical form of a pair key ("x1,y1-x2,y2", the smaller coordinate first)."""
    ends = text.split("-")
    if len(ends) != 2:
        raise ValueError(f"pair {text!r} is not 'x1,y1-x2,y2' (two qubits joined by '-')")
    a, b = sorted(_coordinate(e, what="qubit") for e in ends)
    if a == b:
        raise ValueError(f"pair {text!r} names one qubit twice")
    return f"{_coord_text(a)}-{_coord_text(b)}"


def coordinates(key: str) -> tuple[float, float]:
    """(x, y) of a canonical qubit key."""
    return _coordinate(key, what="qubit")


def pair_coordinates(key: str) -> tuple[tuple[float, float], tuple[float, float]]:
    """The two (x, y) of a canonical pair key, smaller first."""
    a, b = key.split("-")
    return coordinates(a), coordinates(b)


# ---------------------------------------------------------------------------------------------
# checking values (one implementation for inline and CSV)


def value_problem(name: str, value: float) -> str | None:
    """Why ``value`` is not allowed for the per-qubit field ``name``, or None.

    >>> value_problem("readout", 0.04), value_problem("readout", 0.7)
    (None, '0.7 is too large: allowed 0 <= p <= 0.5')
    >>> value_problem("t1_us", 0.0)
    '0 is not allowed: times are > 0 (microseconds)'
    """
    if not math.isfinite(value):
        return f"{value} is not a finite number"
    if name in ("t1_us", "t2_us"):
        return None if value > 0 else f"{value:g} is not allowed: times are > 0 (microseconds)"
    if value < 0:
        return f"{value:g} is not allowed: 0 <= p"
    limit = ERROR_LIMITS[name]
    if value > limit:
        what = "p" if "infidelity" not in name and "excess" not in name else "value"
        return f"{value:g} is too large: allowed 0 <= {what} <= {limit:g}"
    return None


def _entry(raw: object, fields: tuple[str, ...], *, where: str) -> dict[str, float]:
    """One inline entry (a TOML table) checked: known fields, TOML numbers, allowed values."""
    if not isinstance(raw, Mapping):
        raise ValueError(f"{where}: give a table of values, e.g. {{ {fields[0]} = 0.001 }}")
    out: dict[str, float] = {}
    for name, value in raw.items():
        if name not in fields:
            near = difflib.get_close_matches(str(name), fields, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            raise ValueError(f"{where}.{name}: unknown field{hint} (fields: {', '.join(fields)})")
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise ValueError(f"{where}.{name}: {value!r} is not a number")
        if (problem := value_problem(name, float(value))) is not None:
            raise ValueError(f"{where}.{name}: {problem}")
        out[name] = float(value)
    _one_of_two(out, where=where)
    return out


def _one_of_two(values: Mapping[str, float], *, where: str) -> None:
    for comp in ("gate_1q", "gate_2q"):
        if comp in values and f"{comp}_infidelity" in values:
            raise ValueError(f"{where}: give either {comp} or {comp}_infidelity, not both")


def inline_qubits(raw: object) -> dict[str, QubitValues]:
    """``[device.qubits]`` checked, keys canonical; ValueError with the key on a bad entry."""
    return _inline(raw, key=qubit_key, fields=QUBIT_FIELDS, kind=QubitValues)


def inline_pairs(raw: object) -> dict[str, PairValues]:
    """``[device.pairs]`` checked, keys canonical (smaller coordinate first)."""
    return _inline(raw, key=pair_key, fields=PAIR_FIELDS, kind=PairValues)


def _inline(raw: object, *, key: Any, fields: tuple[str, ...], kind: Any) -> dict[str, Any]:
    if not isinstance(raw, Mapping):
        raise ValueError("give a table keyed by coordinates (see `planner layout`)")
    out: dict[str, Any] = {}
    for k, entry in raw.items():
        if isinstance(entry, kind):
            entry = entry.model_dump(exclude_none=True)
        canonical = key(str(k))
        if canonical in out:
            raise ValueError(f"{k!r}: the same {'pair' if '-' in canonical else 'qubit'} is given twice")
        out[canonical] = kind(**_entry(entry, fields, where=repr(str(k))))
    return out


# ---------------------------------------------------------------------------------------------
# CSV tables


def _read_csv(path: Path, *, field: str, source: str) -> tuple[list[str], list[tuple[int, dict[str, Any]]]]:
    """(header, [(line number, row)]) of a CSV table; blank and '#' lines are skipped."""
    try:
        with path.open("rb") as f:
            data = f.read(MAX_TABLE_BYTES + 1)
    except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or exc})", field=field, source=source) from None
    if len(data) > MAX_TABLE_BYTES:
        raise InputError(f"{path}: larger than {MAX_TABLE_BYTES // 2**20} MiB", field=field, source=source)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{path}: not UTF-8 text", field=field, source=source) from None
    # a line starting with '#' is a comment: blanked, so line numbers in messages stay the file's
    lines = ["" if line.lstrip().startswith("#") else line for line in text.splitlines()]
    skip = next((k for k, line in enumerate(lines) if line.strip()), len(lines))  # to the header
    reader = csv.DictReader(io.StringIO("\n".join(lines[skip:])))
    rows = []
    for row in reader:
        if len(rows) >= MAX_TABLE_ROWS:
            raise InputError(f"{path}: more than {MAX_TABLE_ROWS:,} rows", field=field, source=source)
        rows.append((reader.line_num + skip, row))
    if reader.fieldnames is None:
        raise InputError(f"{path}: empty (give a header line, then one row per qubit)", field=field,
                         source=source)
    return [n.strip() for n in reader.fieldnames], rows


def _check_columns(names: list[str], *, keys: tuple[str, ...], fields: tuple[str, ...], path: Path) -> None:
    for k in keys:
        if k not in names:
            raise InputError(f"{path}: missing column {k!r} (the header needs {', '.join(keys)}, then "
                             f"any of {', '.join(fields)})")
    allowed = (*keys, *fields, *LAYOUT_COLUMNS)
    for name in names:
        if name not in allowed:
            near = difflib.get_close_matches(name, allowed, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            raise InputError(f"{path}: unknown column {name!r}{hint} (columns: {', '.join(keys)}, then any "
                             f"of {', '.join(fields)})")
    if not any(f in names for f in fields):
        raise InputError(f"{path}: no value column (give any of {', '.join(fields)})")


def _csv_values(row: Mapping[str, str | None], fields: tuple[str, ...], *, where: str) -> dict[str, float]:
    out: dict[str, float] = {}
    for name in fields:
        cell = (row.get(name) or "").strip()
        if not cell:
            continue  # the component value
        try:
            value = float(cell)
        except ValueError:
            raise ValueError(f"{where}: {name}: {cell!r} is not a number") from None
        if (problem := value_problem(name, value)) is not None:
            raise ValueError(f"{where}: {name}: {problem}")
        out[name] = value
    _one_of_two(out, where=where)
    return out


def _table(path: Path, *, kind: str, field: str, source: str) -> dict[str, dict[str, float]]:
    """A qubit table (``kind`` "qubit") or a pair table ("pair"), keys canonical."""
    keys = ("x", "y") if kind == "qubit" else ("x1", "y1", "x2", "y2")
    fields = QUBIT_FIELDS if kind == "qubit" else PAIR_FIELDS
    names, rows = _read_csv(path, field=field, source=source)
    _check_columns(names, keys=keys, fields=fields, path=path)
    out: dict[str, dict[str, float]] = {}
    for line, raw in rows:
        row = {(k or "").strip(): v for k, v in raw.items()}
        if None in row.values() or "" in row:
            raise InputError(f"{path}: row {line}: {len(names)} cells expected (as many as the header)")
        where = f"row {line}"
        try:
            key, where = _row_key(row, keys, kind=kind, line=line)
            if key in out:
                raise ValueError(f"the same {kind} as an earlier row")
            out[key] = _csv_values(row, fields, where=where)
        except ValueError as exc:
            text = str(exc)
            raise InputError(f"{path}: {text if text.startswith(where) else f'{where}: {text}'}") from None
    return out


def _row_key(row: Mapping[str, str | None], keys: tuple[str, ...], *, kind: str, line: int) -> tuple[str, str]:
    """(canonical key, "row N (key)") of one CSV row."""
    coords = [(row[keys[i]] or "").strip() + "," + (row[keys[i + 1]] or "").strip() for i in range(0, len(keys), 2)]
    key = qubit_key(coords[0]) if kind == "qubit" else pair_key("-".join(coords))
    return key, f"row {line} ({key})"


def _merged(table: dict[str, dict[str, float]], inline: Mapping[str, BaseModel], kind: Any) -> dict[str, Any]:
    """CSV entries overridden field by field by the inline ones (``gate_1q`` and its infidelity
    are one value: the inline one of the two replaces the table's)."""
    out = {k: dict(v) for k, v in table.items()}
    for key, entry in inline.items():
        given = entry.model_dump(exclude_none=True)
        row = out.setdefault(key, {})
        for name, value in given.items():
            base = name.removesuffix("_infidelity")
            row.pop(base, None)
            row.pop(f"{base}_infidelity", None)
            row[name] = value
    return {k: kind(**v) for k, v in sorted(out.items())}


def resolve_tables(target: Target) -> Target:
    """``target`` with its CSV tables read (paths relative to the target file) and merged into
    ``device.qubits`` and ``device.pairs`` (inline values win), so every later stage reads one
    table, and the target's sampling hash covers the tables' contents."""
    dev = target.device
    if dev.qubit_table is None and dev.pair_table is None:
        return target
    source = target.source
    base = Path(source).parent if source != "<memory>" else Path(".")
    update: dict[str, Any] = {}
    if dev.qubit_table is not None:
        table = _table(base / dev.qubit_table, kind="qubit", field="device.qubit_table", source=source)
        update["qubits"] = _merged(table, dev.qubits, QubitValues)
    if dev.pair_table is not None:
        table = _table(base / dev.pair_table, kind="pair", field="device.pair_table", source=source)
        update["pairs"] = _merged(table, dev.pairs, PairValues)
    return target.model_copy(update={"device": dev.model_copy(update=update)})


def qubits_problem(target: Target) -> tuple[str, str] | None:
    """(key, problem) for a per-qubit table that a preset excludes, or a qubit whose T1 and T2
    (its own, or the component's) cannot belong to one qubit; None when all is well."""
    dev = target.device
    if not (dev.qubits or dev.pairs):
        return None
    if dev.preset is not None:
        key = "device.qubits" if dev.qubits else "device.pairs"
        return key, "not used with device.preset: a preset is uniform (remove the table or the preset)"
    if dev.coherence is None:
        return None  # the missing section is reported by the budget checks
    for key, values in dev.qubits.items():
        t1 = values.t1_us if values.t1_us is not None else dev.coherence.t1_us
        t2 = values.t2_us if values.t2_us is not None else dev.coherence.t2_us
        if (problem := coherence_problem(t1_us=t1, t2_us=t2)) is not None:
            where = f"{dev.qubit_table}: qubit {key}" if dev.qubit_table else f'device.qubits."{key}"'
            return f"{where}.t2_us", problem
    return None
