"""The identity of a sweep: ``DIR/manifest.json`` and the byte copy ``DIR/target.toml``.

A strong id hashes the circuit text, the decoder and the detector error model, so it changes
with the target file and with the versions of stim, sinter and pymatching. The manifest records
all of these; samples of two different identities are never mixed in one directory.
"""

from __future__ import annotations

import dataclasses
import json
import os
import tempfile
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

import sinter
import stim

from planner.errors import InputError

MANIFEST = "manifest.json"
TARGET_COPY = "target.toml"
FORMAT = 1
VERSIONED = ("stim", "sinter", "pymatching")


def software_versions() -> dict[str, str]:
    """Versions that change strong ids (compared on resume and merge)."""
    import pymatching

    return {"stim": stim.__version__, "sinter": sinter.__version__,
            "pymatching": pymatching.__version__}


def detector_error_model_for(circuit: stim.Circuit) -> stim.DetectorErrorModel:
    """The detector error model sinter's workers derive from a circuit (decomposed if possible)."""
    try:
        return circuit.detector_error_model(decompose_errors=True, approximate_disjoint_errors=True)
    except ValueError:  # not graphlike: the decoder gets the undecomposed model, as in sinter
        try:
            return circuit.detector_error_model(approximate_disjoint_errors=True)
        except ValueError:
            return circuit.detector_error_model(approximate_disjoint_errors=True, flatten_loops=True)


def resolved_task(task: sinter.Task) -> sinter.Task:
    """The task with its detector error model filled in, so ``strong_id()`` works here.

    The model is computed the way sinter's workers compute it (decomposed where possible), so
    the strong id equals the one sinter itself would report for the same circuit.
    """
    if task.detector_error_model is not None:
        return task
    circuit = task.circuit if task.circuit is not None else stim.Circuit.from_file(task.circuit_path)
    dem = detector_error_model_for(circuit)
    return sinter.Task(circuit=circuit, decoder=task.decoder, detector_error_model=dem,
                       postselection_mask=task.postselection_mask,
                       postselected_observables_mask=task.postselected_observables_mask,
                       json_metadata=task.json_metadata, collection_options=task.collection_options)


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

    @classmethod
    def for_sweep(cls, *, target_sha256: str, target_name: str, tasks: Iterable[sinter.Task],
                  budget: str | None, max_errors: int | None, max_shots: int | None,
                  sample_sha256: str = "") -> Manifest:
        entries = []
        for t in tasks:
            t = resolved_task(t)
            entries.append(TaskEntry(strong_id=t.strong_id(), decoder=str(t.decoder),
                                     json_metadata=t.json_metadata))
        return cls(target_sha256=target_sha256, target_name=target_name,
                   versions=software_versions(), tasks=tuple(entries), budget=budget,
                   max_errors=max_errors, max_shots=max_shots, sample_sha256=sample_sha256)

    def to_json(self) -> dict[str, Any]:
        import planner

        return {
            "format": FORMAT,
            "target_sha256": self.target_sha256,
            "sample_sha256": self.sample_sha256,
            "target_name": self.target_name,
            "versions": dict(self.versions),
            "planner_version": planner.__version__,
            "budget": {"name": self.budget, "max_errors": self.max_errors, "max_shots": self.max_shots},
            "tasks": [dataclasses.asdict(e) for e in self.tasks],
        }

    @classmethod
    def from_json(cls, doc: Mapping[str, Any], *, source: str) -> Manifest:
        try:
            budget = doc.get("budget") or {}
            return cls(target_sha256=str(doc["target_sha256"]), target_name=str(doc.get("target_name", "")),
                       versions={k: str(v) for k, v in doc["versions"].items()},
                       tasks=tuple(TaskEntry(strong_id=str(e["strong_id"]), decoder=str(e["decoder"]),
                                             json_metadata=e["json_metadata"]) for e in doc["tasks"]),
                       budget=budget.get("name"), max_errors=budget.get("max_errors"),
                       max_shots=budget.get("max_shots"),
                       sample_sha256=str(doc.get("sample_sha256", "")))
        except (KeyError, TypeError, AttributeError) as exc:
            raise InputError(f"{source}: not a planner manifest (missing or bad field {exc})") from None

    @property
    def strong_ids(self) -> set[str]:
        return {e.strong_id for e in self.tasks}


def read_manifest(out_dir: Path) -> Manifest | None:
    """The manifest of ``out_dir``, or None when there is none yet."""
    path = Path(out_dir) / MANIFEST
    try:
        text = path.read_text()
    except FileNotFoundError:
        return None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}: not valid JSON ({exc})") from None
    return Manifest.from_json(doc, source=str(path))


def _atomic_write(path: Path, data: bytes) -> None:
    # temp file + rename: concurrent shard jobs may write the same file, readers never see half
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}-", suffix=".tmp")
    umask = os.umask(0o022)
    os.umask(umask)
    os.fchmod(fd, 0o666 & ~umask)  # mkstemp makes 0600; other jobs and users read these files
    with os.fdopen(fd, "wb") as fh:
        fh.write(data)
    os.replace(tmp, path)


def write_manifest(out_dir: Path, manifest: Manifest) -> Path:
    path = Path(out_dir) / MANIFEST
    _atomic_write(path, (json.dumps(manifest.to_json(), indent=1) + "\n").encode())
    return path


def identity_difference(old: Manifest, new: Manifest) -> str | None:
    """What makes two manifests incompatible (None when samples may be combined).

    >>> a = Manifest(target_sha256="aa", target_name="t", versions={"stim": "1"}, tasks=())
    >>> identity_difference(a, dataclasses.replace(a, versions={"stim": "2"}))
    'stim version 1 vs 2'
    """
    same_samples = bool(old.sample_sha256) and old.sample_sha256 == new.sample_sha256
    if old.target_sha256 != new.target_sha256 and not same_samples:
        return (f"target file hash {old.target_sha256[:12]} vs {new.target_sha256[:12]} "
                "(its device or sweep section changed)")
    diffs = [f"{k} version {old.versions.get(k)} vs {new.versions.get(k)}"
             for k in VERSIONED if old.versions.get(k) != new.versions.get(k)]
    if diffs:
        return "; ".join(diffs)
    return None


def writable_dir(path: Path, *, option: str = "--out") -> Path:
    """Create ``path`` if needed and check it can be written (InputError naming it otherwise).
    Commands call it before any work or chatter, so a refusal is one line."""
    if path.exists() and not path.is_dir():
        raise InputError(f"{path}: {option} exists and is not a directory")
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{path}: cannot create the {option} directory ({exc.strerror or exc})") from None
    if not os.access(path, os.W_OK):
        raise InputError(f"{path}: the {option} directory is not writable")
    return path


def prepare_out_dir(out_dir: Path, *, target_bytes: bytes, manifest: Manifest) -> Manifest:
    """Create or resume ``out_dir`` for ``manifest``: refuse another identity, never mix.

    Writes ``target.toml`` (byte copy) and ``manifest.json``; a resumed directory keeps its
    tasks and records the latest budget.
    """
    out_dir = writable_dir(Path(out_dir))
    old = read_manifest(out_dir)
    if old is not None:
        diff = identity_difference(old, manifest)
        if diff is None and old.strong_ids != manifest.strong_ids:
            diff = (f"the sweep's tasks differ ({len(manifest.strong_ids - old.strong_ids)} new, "
                    f"{len(old.strong_ids - manifest.strong_ids)} gone)")
        if diff is not None:
            raise InputError(f"{out_dir}: holds samples of another sweep: {diff}; use another "
                             f"--out or delete {out_dir}")
    # the device and sweep are unchanged (goal, costs or roadmap edited): keep the samples and
    # take the new target copy, so the query commands answer for the edited goal
    write_target_copy(out_dir, target_bytes, replace=old is not None)
    write_manifest(out_dir, manifest)
    return manifest


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


def write_target_copy(out_dir: Path, target_bytes: bytes, *, replace: bool = False) -> None:
    """Write ``DIR/target.toml``; an existing copy with other bytes is refused unless ``replace``
    (the caller has checked that the samples' identity is unchanged)."""
    copy = Path(out_dir) / TARGET_COPY
    if copy.exists() and not replace:
        if copy.read_bytes() != target_bytes:
            raise InputError(f"{copy}: differs from the target being written; use another --out "
                             f"or delete {out_dir}")
        return
    _atomic_write(copy, target_bytes)
