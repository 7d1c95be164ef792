"""The identity of a sweep: ``DIR/manifest.json`` and the byte copy ``DIR/target.toml``.

A strong id hashes the circuit text, the decoder and the detector error model, so it changes
with the target file and with the versions of stim, sinter and pymatching. The manifest records
all of these; samples of two different identities are never mixed in one directory.
"""

from __future__ import annotations

import dataclasses
import json
import sys
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

import sinter
import stim

from planner.errors import InputError
from planner.store.fileio import atomic_write
from planner.sweep import resolved_task

MANIFEST = "manifest.json"
TARGET_COPY = "target.toml"
FORMAT = 1
VERSIONED = ("stim", "sinter", "pymatching")


def software_versions() -> dict[str, str]:
    """Versions that change strong ids (compared on resume and merge)."""
    import pymatching

    return {"stim": stim.__version__, "sinter": sinter.__version__,
            "pymatching": pymatching.__version__}


@dataclasses.dataclass(frozen=True)
class TaskEntry:
    strong_id: str
    decoder: str
    json_metadata: Any


@dataclasses.dataclass(frozen=True)
class Manifest:
    """What a sample directory holds: which target (by hash), which tasks, which software."""

    target_sha256: str
    target_name: str
    versions: Mapping[str, str]
    tasks: tuple[TaskEntry, ...]
    budget: str | None = None
    max_errors: int | None = None
    max_shots: int | None = None
    #: hash of the target's device and sweep sections only (see Target.sampling_sha256)
    sample_sha256: str = ""
    #: what decides every task's circuit: the device section (its name aside), the code and the
    #: decoder (see :func:`device_identity`); equal identities let a sweep grow in place
    device: Mapping[str, Any] | None = None
    #: tasks an earlier sweep of this directory sampled that the current sweep no longer lists:
    #: their rows stay on disk, unread, and count again if the sweep adds them back
    retired: tuple[TaskEntry, ...] = ()

    @classmethod
    def for_sweep(cls, *, target_sha256: str, target_name: str, tasks: Iterable[sinter.Task],
                  budget: str | None, max_errors: int | None, max_shots: int | None,
                  sample_sha256: str = "", device: Mapping[str, Any] | None = None) -> Manifest:
        entries = []
        for t in tasks:
            t = resolved_task(t)
            entries.append(TaskEntry(strong_id=t.strong_id(), decoder=str(t.decoder),
                                     json_metadata=t.json_metadata))
        return cls(target_sha256=target_sha256, target_name=target_name,
                   versions=software_versions(), tasks=tuple(entries), budget=budget,
                   max_errors=max_errors, max_shots=max_shots, sample_sha256=sample_sha256,
                   device=device)

    def to_json(self) -> dict[str, Any]:
        # the package is imported before any of its modules: read its version without an import
        # (planner/__init__ re-exports the store; importing it here would be a cycle)
        version = getattr(sys.modules.get("planner"), "__version__", "unknown")
        return {
            "format": FORMAT,
            "target_sha256": self.target_sha256,
            "sample_sha256": self.sample_sha256,
            "target_name": self.target_name,
            "versions": dict(self.versions),
            "planner_version": version,
            "budget": {"name": self.budget, "max_errors": self.max_errors, "max_shots": self.max_shots},
            "tasks": [dataclasses.asdict(e) for e in self.tasks],
            "device": None if self.device is None else dict(self.device),
            "retired_tasks": [dataclasses.asdict(e) for e in self.retired],
        }

    @classmethod
    def from_json(cls, doc: Mapping[str, Any], *, source: str, text: str = "") -> Manifest:
        """The manifest in ``doc`` (parsed JSON); InputError naming ``source`` (and, given the
        file's ``text``, the line) for a missing field or one of the wrong type."""
        if not isinstance(doc, Mapping):
            raise InputError(f"{source}: not a planner manifest (a JSON object is expected)")
        check = _Fields(source=source, text=text)
        versions = doc.get("versions")
        if not isinstance(versions, Mapping) or not all(isinstance(v, str) for v in versions.values()):
            raise check.bad("versions", "must be an object of version strings")
        budget = doc.get("budget") or {}
        if not isinstance(budget, Mapping):
            raise check.bad("budget", "must be an object or null")
        name = budget.get("name")
        if name is not None and not isinstance(name, str):
            raise check.bad("name", "must be a string or null")
        device = doc.get("device")
        if device is not None and not isinstance(device, Mapping):
            raise check.bad("device", "must be an object or null")
        return cls(target_sha256=check.string(doc, "target_sha256"),
                   target_name=check.string(doc, "target_name", ""),
                   versions={str(k): v for k, v in versions.items()}, tasks=check.tasks(doc),
                   budget=name, max_errors=check.count(budget, "max_errors"),
                   max_shots=check.count(budget, "max_shots"),
                   sample_sha256=check.string(doc, "sample_sha256", ""), device=device,
                   retired=check.tasks(doc, "retired_tasks", required=False))

    @property
    def strong_ids(self) -> set[str]:
        return {e.strong_id for e in self.tasks}

    @property
    def retired_ids(self) -> set[str]:
        """Strong ids of tasks sampled before and no longer in the sweep (see :attr:`retired`)."""
        return {e.strong_id for e in self.retired} - self.strong_ids


@dataclasses.dataclass(frozen=True)
class _Fields:
    """Reads a manifest's fields, or says which one is wrong (file, line, field, what is allowed)."""

    source: str
    text: str = ""

    def bad(self, key: str, allowed: str) -> InputError:
        line = f":{_line_of(self.text, chr(34) + key + chr(34))}" if self.text else ""
        return InputError(f"{self.source}{line}: {key}: {allowed} (not a planner manifest, or edited)")

    def string(self, d: Mapping[str, Any], key: str, default: str | None = None) -> str:
        value = d.get(key, default)
        if not isinstance(value, str):
            raise self.bad(key, "must be a string" if key in d else "missing")
        return value

    def count(self, d: Mapping[str, Any], key: str) -> int | None:
        value = d.get(key)
        if value is not None and (isinstance(value, bool) or not isinstance(value, int) or value < 0):
            raise self.bad(key, "must be a whole number >= 0 or null")
        return value

    def tasks(self, doc: Mapping[str, Any], key: str = "tasks", *, required: bool = True) -> tuple[TaskEntry, ...]:
        tasks = doc.get(key, None if required else [])
        if not isinstance(tasks, list):
            raise self.bad(key, "must be a list" if key in doc else "missing")
        entries = []
        for e in tasks:
            if not isinstance(e, Mapping) or "json_metadata" not in e:
                raise self.bad(key, "each task must be an object with strong_id, decoder, json_metadata")
            entries.append(TaskEntry(strong_id=self.string(e, "strong_id"), decoder=self.string(e, "decoder"),
                                     json_metadata=e["json_metadata"]))
        return tuple(entries)


#: a manifest lists a few hundred tasks; anything far larger was not written by planner
MAX_MANIFEST_BYTES = 64 * 1024 * 1024
_MAX_DEPTH = 64


def _line_of(text: str, needle: str) -> int:
    """1-based line of the first ``needle`` in ``text`` (1 when absent)."""
    at = text.find(needle)
    return text.count("\n", 0, at) + 1 if at >= 0 else 1


def _too_deep_line(text: str, limit: int = _MAX_DEPTH) -> int | None:
    """Line where JSON brackets (outside strings) nest deeper than ``limit``, if anywhere.

    >>> _too_deep_line('{"a": [[1]]}', limit=2), _too_deep_line('{"a": [1]}', limit=2)
    (1, None)
    """
    depth, in_str, esc, line = 0, False, False, 1
    for ch in text:
        if ch == "\n":
            line += 1
        if in_str:
            if esc:
                esc = False
            elif ch == "\\":
                esc = True
            elif ch == '"':
                in_str = False
        elif ch == '"':
            in_str = True
        elif ch in "[{":
            depth += 1
            if depth > limit:
                return line
        elif ch in "]}":
            depth -= 1
    return None


def read_manifest(out_dir: Path) -> Manifest | None:
    """The manifest of ``out_dir``, or None when there is none yet. A manifest that is not
    planner's (not UTF-8, not JSON, nested too deeply, a field of the wrong type) is an
    InputError naming the file and the line."""
    path = Path(out_dir) / MANIFEST
    try:
        size = path.stat().st_size
    except FileNotFoundError:
        return None
    if size > MAX_MANIFEST_BYTES:
        raise InputError(f"{path}: {size:,} bytes is too large for a planner manifest "
                         f"(at most {MAX_MANIFEST_BYTES:,})")
    data = path.read_bytes()
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise InputError(f"{path}:{line}: not UTF-8 text "
                         "(a planner manifest is JSON)") from None
    deep = _too_deep_line(text)
    if deep is not None:
        raise InputError(f"{path}:{deep}: JSON nested more than {_MAX_DEPTH} levels deep "
                         "(not a planner manifest)")
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from None
    except RecursionError:
        raise InputError(f"{path}: JSON nested too deeply (not a planner manifest)") from None
    return Manifest.from_json(doc, source=str(path), text=text)


def write_manifest(out_dir: Path, manifest: Manifest) -> Path:
    path = Path(out_dir) / MANIFEST
    atomic_write(path, (json.dumps(manifest.to_json(), indent=1) + "\n").encode())
    return path


def device_identity(target: Any) -> dict[str, Any]:
    """What decides every task's circuit: the target's device section (its display name aside),
    the code and the decoder. Two sweeps with the same identity may share an out directory: the
    grid (distances, round counts, bases, scale points) may grow or shrink."""
    device = target.model_dump(include={"device"}, mode="json")["device"]
    device.pop("name", None)
    return {"device": device, "code": target.sweep.code, "decoder": target.sweep.decoder}


def _flat(doc: Any, prefix: str = "") -> dict[str, Any]:
    """``{"a": {"b": 1}}`` as ``{"a.b": 1}``.

    >>> _flat({"a": {"b": 1, "c": None}, "d": [1]})
    {'a.b': 1, 'a.c': None, 'd': [1]}
    """
    if not isinstance(doc, Mapping):
        return {prefix: doc}
    out: dict[str, Any] = {}
    for k, v in doc.items():
        key = f"{prefix}.{k}" if prefix else str(k)
        out.update(_flat(v, key) if isinstance(v, Mapping) and v else {key: v})
    return out


def device_difference(old: Mapping[str, Any], new: Mapping[str, Any]) -> str | None:
    """The keys that differ between two :func:`device_identity` documents, with both values
    (None when equal).

    >>> device_difference({"device": {"errors": {"gate_2q": 0.004}}, "code": "surface"},
    ...                   {"device": {"errors": {"gate_2q": 0.005}}, "code": "surface"})
    'device.errors.gate_2q 0.004 vs 0.005'
    """
    a, b = _flat(old), _flat(new)
    # a key one side lacks and the other holds as null is the same device (a section added to
    # the target format later, at its default)
    keys = [k for k in dict.fromkeys([*a, *b]) if a.get(k) != b.get(k)]
    if not keys:
        return None
    shown = [f"{k} {a.get(k, 'absent')} vs {b.get(k, 'absent')}" for k in keys[:4]]
    more = f" (and {len(keys) - 4} more)" if len(keys) > 4 else ""
    return "; ".join(shown) + more


def identity_difference(old: Manifest, new: Manifest) -> str | None:
    """What makes two manifests incompatible (None when samples may be combined).

    Manifests that record the device identity compare it (the sweep grid may differ); older
    ones compare the hash of the device and sweep sections.

    >>> a = Manifest(target_sha256="aa", target_name="t", versions={"stim": "1"}, tasks=())
    >>> identity_difference(a, dataclasses.replace(a, versions={"stim": "2"}))
    'stim version 1 vs 2'
    """
    if old.device is not None and new.device is not None:
        changed = device_difference(old.device, new.device)
        if changed is not None:
            return f"the device changed: {changed}"
    else:
        same_samples = bool(old.sample_sha256) and old.sample_sha256 == new.sample_sha256
        if old.target_sha256 != new.target_sha256 and not same_samples:
            return (f"target file hash {old.target_sha256[:12]} vs {new.target_sha256[:12]} "
                    "(its device or sweep section changed)")
    diffs = [f"{k} version {old.versions.get(k)} vs {new.versions.get(k)}"
             for k in VERSIONED if old.versions.get(k) != new.versions.get(k)]
    if diffs:
        return "; ".join(diffs)
    return None


def _task_key(meta: Any) -> str:
    return json.dumps(meta, sort_keys=True)


@dataclasses.dataclass(frozen=True)
class Growth:
    """How a sweep changed against the one an out directory holds: tasks kept with their
    samples, tasks new to sample, tasks no longer in the sweep (their rows stay on disk)."""

    kept: int
    added: int
    retired: int

    def describe(self, where: str) -> str:
        """One line for the user.

        >>> Growth(kept=3, added=2, retired=0).describe("out/x")
        'out/x: the sweep changed: 3 task(s) keep their samples, 2 new task(s) to sample'
        """
        parts = [f"{self.kept} task(s) keep their samples", f"{self.added} new task(s) to sample"]
        if self.retired:
            parts.append(f"{self.retired} task(s) no longer in the sweep (their samples stay on "
                         "disk and count again if the sweep lists them again)")
        return f"{where}: the sweep changed: " + ", ".join(parts)


def grow(old: Manifest, new: Manifest) -> tuple[Manifest, Growth] | str:
    """``new`` with the tasks ``old`` sampled and ``new`` no longer lists recorded as retired,
    and what changed; or why the two cannot share samples: a task with the same settings
    (metadata) but another circuit means the noise placement or the software changed.

    >>> e = lambda sid, d: TaskEntry(strong_id=sid, decoder="pymatching", json_metadata={"d": d})
    >>> a = Manifest(target_sha256="a", target_name="t", versions={}, tasks=(e("x", 3),))
    >>> grown, g = grow(a, dataclasses.replace(a, tasks=(e("x", 3), e("y", 5))))
    >>> g, grow(a, dataclasses.replace(a, tasks=(e("z", 3),)))[:40]
    (Growth(kept=1, added=1, retired=0), 'a task with the same settings ({"d": 3})')
    """
    by_key = {_task_key(e.json_metadata): e for e in (*old.retired, *old.tasks)}
    for e in new.tasks:
        was = by_key.get(_task_key(e.json_metadata))
        if was is not None and (was.strong_id != e.strong_id or was.decoder != e.decoder):
            return (f"a task with the same settings ({_task_key(e.json_metadata)}) now has another "
                    "circuit or decoder (planner's noise placement or a library changed)")
    ids = new.strong_ids
    retired = {e.strong_id: e for e in (*old.retired, *old.tasks) if e.strong_id not in ids}
    kept = len(ids & (old.strong_ids | old.retired_ids))
    growth = Growth(kept=kept, added=len(ids) - kept, retired=len(retired))
    return dataclasses.replace(new, retired=tuple(retired.values())), growth


def combine_manifests(named: list[tuple[str, Manifest]]) -> Manifest:
    """One manifest for samples merged from several directories (``(where, manifest)`` pairs).

    Refuses (InputError naming both places) when two disagree on the target hash or on the
    versions; the task lists are united (first seen order), the first budget is kept.
    """
    if not named:
        raise ValueError("nothing to combine")
    first_where, first = named[0]
    entries = {e.strong_id: e for e in first.tasks}
    for where, m in named[1:]:
        diff = identity_difference(first, m)
        if diff is not None:
            raise InputError(f"{where}: cannot be merged with {first_where}: {diff}")
        for e in m.tasks:
            entries.setdefault(e.strong_id, e)
    return dataclasses.replace(first, tasks=tuple(entries.values()))
