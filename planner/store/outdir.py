"""The out directory: where planner may write, the sweep's set-up (manifest and target copy),
the sampling lock, and reading it back (the target copy and the summed samples of the manifest's
tasks).
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import os
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import sinter

from planner.errors import InputError
from planner.store.fileio import atomic_write
from planner.store.manifest import (
    MANIFEST,
    TARGET_COPY,
    Manifest,
    device_identity,
    grow,
    identity_difference,
    read_manifest,
    write_manifest,
)

if TYPE_CHECKING:
    from planner.config import Target


#: what planner writes into an out directory (besides dot-files and ``*.lock``: its temporary
#: files and locks); an existing directory holding anything else, and no manifest, is refused
PLANNER_ENTRIES = frozenset({
    MANIFEST, TARGET_COPY, "samples", "verify", "plots", "report.html", "fits.json",
    "requirements.md", "requirements.csv", "roadmap.md", "roadmap.csv", "roadmap_dates.csv",
    "sensitivity.md", "sensitivity.csv",
    "spread", "spread.md", "spread.csv", "spread.json",  # planner spread (its default out is DIR/spread)
})


#: what an out directory should be instead of a refused one
_OWN_DIR = "a directory of its own (e.g. out/NAME)"


def check_out_dir(path: Path, *, field: str = "out_dir", option: str | None = None) -> None:
    """Refuse an out directory planner must not write into (InputError naming ``field``, with the
    path as its source): a file-system root, the current directory (an empty path, or a target
    file named like ``...toml``), or an existing directory holding files planner did not write.
    A planner out directory (one with ``manifest.json``), an empty one, or one holding only
    planner's own files is fine. ``option``: an older name for ``field``.
    """
    path = Path(path)
    field = option or field
    if (path / MANIFEST).is_file():
        return  # a planner out directory: resuming or adding to it is what it is for
    resolved = path.resolve()
    if resolved == Path(resolved.anchor):
        raise InputError("is a file-system root", field=field, source=str(path), allowed=_OWN_DIR)
    if resolved == Path.cwd().resolve() or str(path) in ("", "."):
        raise InputError("is the current directory (empty, or a target file named like '...toml'?)",
                         field=field, source=str(path), allowed=_OWN_DIR)
    if path.is_dir():
        _refuse_foreign(path, field)


def _refuse_foreign(path: Path, field: str) -> None:
    try:
        names = sorted(os.listdir(path))
    except OSError as exc:
        raise InputError(f"cannot list the directory ({exc.strerror or exc})", field=field,
                         source=str(path)) from None
    foreign = [n for n in names if n not in PLANNER_ENTRIES and not n.startswith(".") and not n.endswith(".lock")]
    if foreign:
        more = f" and {len(foreign) - 1} more" if len(foreign) > 1 else ""
        raise InputError(f"already holds files planner did not write ({foreign[0]!r}{more})", field=field,
                         source=str(path), allowed="a new or empty directory, or a planner out directory")


def writable_dir(path: Path, *, field: str = "out_dir", option: str | None = None) -> Path:
    """Create ``path`` if needed and check it can be written (InputError naming ``field``, with
    the path as its source, otherwise). Commands call it before any work or chatter, so a
    refusal is one line. An out directory that is not planner's to write (see
    :func:`check_out_dir`) is refused; a directory inside a planner out directory
    (``DIR/verify``) only has to be writable. ``option``: an older name for ``field``."""
    field = option or field
    if path.exists() and not path.is_dir():
        raise InputError("exists and is not a directory", field=field, source=str(path))
    if not (path.parent / MANIFEST).is_file():
        check_out_dir(path, field=field)
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the directory ({exc.strerror or exc})", field=field,
                         source=str(path)) from None
    if not os.access(path, os.W_OK):
        raise InputError("the directory is not writable", field=field, source=str(path))
    return path


def prepare_out_dir(out_dir: Path, *, target_bytes: bytes, manifest: Manifest,
                    notify: Callable[[str], None] | None = None) -> Manifest:
    """Create or resume ``out_dir`` for ``manifest``: refuse another identity, never mix.

    Writes ``target.toml`` (byte copy) and ``manifest.json``; a resumed directory keeps its
    tasks and records the latest budget. A sweep of the same device whose grid changed (a
    distance, a round count, a basis or a scale point added or removed) keeps the samples of
    every unchanged task; ``notify`` is told what was kept and what is new.
    """
    out_dir = writable_dir(Path(out_dir))
    old = read_manifest(out_dir)
    if old is not None and old.device is None and manifest.device is not None:
        old = dataclasses.replace(old, device=_device_of_copy(out_dir))
    if old is not None:
        diff = identity_difference(old, manifest)
        if diff is None and old.device is None and old.strong_ids != manifest.strong_ids:
            diff = (f"the sweep's tasks differ ({len(manifest.strong_ids - old.strong_ids)} new, "
                    f"{len(old.strong_ids - manifest.strong_ids)} gone) and this directory was written "
                    "before sweeps could grow")
        if diff is None and old.device is not None:
            grown = grow(old, manifest)
            if isinstance(grown, str):
                diff = grown
            else:
                changed = grown[0].strong_ids != old.strong_ids
                manifest, growth = grown
                if changed and notify is not None:
                    notify(growth.describe(str(out_dir)))
        if diff is not None:
            raise InputError(f"{out_dir}: holds samples of another sweep: {diff}; use another "
                             f"--out or delete {out_dir}")
    # the device and sweep are unchanged (goal, costs or roadmap edited): keep the samples and
    # take the new target copy, so the query commands answer for the edited goal
    write_target_copy(out_dir, target_bytes, replace=old is not None)
    write_manifest(out_dir, manifest)
    return manifest


def _device_of_copy(out_dir: Path) -> dict | None:
    """The device identity of an older out directory (its manifest predates the record) from its
    target copy, so that its sweep can grow too; None when the copy cannot be read."""
    from planner.config import load_target

    try:
        return device_identity(load_target(Path(out_dir) / TARGET_COPY))
    except (InputError, OSError):
        return None


def write_target_copy(out_dir: Path, target_bytes: bytes, *, replace: bool = False) -> None:
    """Write ``DIR/target.toml``; an existing copy with other bytes is refused unless ``replace``
    (the caller has checked that the samples' identity is unchanged)."""
    copy = Path(out_dir) / TARGET_COPY
    if copy.exists() and not replace:
        if copy.read_bytes() != target_bytes:
            raise InputError(f"{copy}: differs from the target being written; use another --out "
                             f"or delete {out_dir}")
        return
    atomic_write(copy, target_bytes)


@contextlib.contextmanager
def sampling_lock(out: Path, *, shared: bool) -> Iterator[contextlib.ExitStack]:
    """Create ``out`` if needed and hold its sampling lock (see :mod:`planner.store.lock`);
    yields an ExitStack closed before the lock is released. A directory this call created is
    removed again when the job fails and leaves it empty (an unreachable cluster leaves nothing)."""
    from planner.store.lock import out_dir_lock

    created = not out.exists()
    writable_dir(out)
    ok = False
    try:
        with out_dir_lock(out, shared=shared), contextlib.ExitStack() as stack:
            yield stack
        ok = True
    finally:
        if created and not ok:
            with contextlib.suppress(OSError):
                out.rmdir()  # only if empty


def target_bytes_of(target: Target) -> bytes:
    """The bytes of ``target``'s file, checked against the hash it was read with."""
    try:
        data = Path(target.source).read_bytes()
    except OSError as exc:
        raise InputError(f"{target.source}: cannot read the target file to copy it ({exc})") from None
    if hashlib.sha256(data).hexdigest() != target.sha256:
        raise InputError(f"{target.source}: changed while the sweep was being planned; run again")
    return data


def prepare_sweep_dir(out_dir: Path, *, target: Target, tasks: Sequence[sinter.Task], budget: str | None,
                      max_errors: int | None, max_shots: int | None,
                      notify: Callable[[str], None] | None = None) -> Manifest:
    """Write (or check, on a resume) the manifest of a sweep of ``tasks`` and the target copy:
    another target or other software versions are refused (see :func:`prepare_out_dir`)."""
    manifest = Manifest.for_sweep(target_sha256=target.sha256, target_name=target.name,
                                  sample_sha256=target.sampling_sha256, tasks=tasks, budget=budget,
                                  max_errors=max_errors, max_shots=max_shots,
                                  device=device_identity(target))
    prepared = prepare_out_dir(out_dir, target_bytes=target_bytes_of(target), manifest=manifest,
                               notify=notify)
    copy_tables(out_dir, target)
    return prepared


def copy_tables(out_dir: Path, target: Target) -> None:
    """The per-qubit CSV tables the target names (relative to it) beside its copy, so that
    ``DIR/target.toml`` reads the same tables. A table given by an absolute path is read from
    there; one outside the target's directory ('..') cannot be placed beside the copy."""
    base = Path(target.source).parent
    for name in (target.device.qubit_table, target.device.pair_table):
        if name is None or Path(name).is_absolute() or ".." in Path(name).parts:
            continue
        dest = Path(out_dir) / name
        dest.parent.mkdir(parents=True, exist_ok=True)
        atomic_write(dest, (base / name).read_bytes())


def require_out_dir(directory: Path | str, *, hint: str = "") -> Path:
    """``directory`` as a Path if it is an existing directory; else the InputError that says
    whether nothing is there or something that is not a directory (``hint``: what to do).

    >>> import tempfile; f = tempfile.NamedTemporaryFile()
    >>> require_out_dir(f.name)
    Traceback (most recent call last):
    ...
    planner.errors.InputError: ...: exists and is not a directory (give an out directory)
    """
    root = Path(directory)
    if root.is_dir():
        return root
    if root.exists():
        raise InputError(f"{root}: exists and is not a directory (give an out directory)")
    raise InputError(f"{root}: no such out directory{hint}")
