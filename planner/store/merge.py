"""Merging sample directories: every chunk once, into one new shard; a new destination is built
beside it and renamed into place, so a failed merge leaves no half-made directory."""

from __future__ import annotations

import dataclasses
import os
import shutil
import tempfile
from collections.abc import Sequence
from pathlib import Path

from planner.errors import InputError
from planner.store.fileio import remove_quietly, umask, write_error
from planner.store.manifest import (
    TARGET_COPY,
    Manifest,
    combine_manifests,
    read_manifest,
    write_manifest,
)
from planner.store.outdir import check_out_dir, require_out_dir, write_target_copy
from planner.store.shardfile import SHARD_SUFFIX, SampleRow
from planner.store.shards import SampleStore, default_shard_name


@dataclasses.dataclass(frozen=True)
class MergeResult:
    """What :func:`merge_into` copied: rows (chunks) and shots new to the destination."""

    copied_rows: int
    copied_shots: int
    skipped_rows: int
    shard: Path | None


def merge_into(dest: SampleStore, sources: Sequence[SampleStore]) -> MergeResult:
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


@dataclasses.dataclass(frozen=True)
class DirectoryMerge:
    """What :func:`merge_directories` did: the copy into ``out`` and what the sources said
    (rows ignored or set aside), to be shown once the merge worked."""

    out: Path
    sources: int
    result: MergeResult
    notices: tuple[str, ...]

    @property
    def shard(self) -> Path | None:
        """The new shard under ``out/samples`` (None when every chunk was already there)."""
        return self.out / "samples" / self.result.shard.name if self.result.shard else None


def _source_stores(sources: Sequence[Path]) -> tuple[list[tuple[str, Manifest]], list[SampleStore], bytes | None]:
    named: list[tuple[str, Manifest]] = []
    stores: list[SampleStore] = []
    target_bytes = None
    for src in map(Path, sources):
        require_out_dir(src)
        m = read_manifest(src)
        if m is None:
            raise InputError(f"{src}: not a planner out directory (no manifest.json)")
        store = SampleStore(src, notify=None)  # notices are said once the merge worked
        if not store.shard_files():
            raise InputError(f"{src}: holds no samples ({store.samples_dir} has no .csv shards)")
        if target_bytes is None and (src / TARGET_COPY).is_file():
            target_bytes = (src / TARGET_COPY).read_bytes()
        named.append((str(src), m))
        stores.append(store)
    return named, stores, target_bytes


def merge_directories(sources: Sequence[Path], out: Path) -> DirectoryMerge:
    """Copy the samples of the out directories ``sources`` into ``out`` (created if missing; may
    be one of the sources), each chunk once. Directories of another target or other software
    versions are refused (InputError naming both)."""
    out = Path(out)
    named, stores, target_bytes = _source_stores(sources)
    if out.exists() and not out.is_dir():
        raise InputError("exists and is not a directory", field="out_dir", source=str(out))
    check_out_dir(out)
    existing = read_manifest(out) if out.is_dir() else None
    if existing is not None:
        named.insert(0, (str(out), existing))
    combined = combine_manifests(named)
    if out.is_dir():
        result = _merge_into_dir(out, combined, target_bytes, stores)
    else:
        result = _merge_into_new_dir(out, combined, target_bytes, stores)
    notices = tuple(dict.fromkeys(m for store in stores for m in store.notices))
    return DirectoryMerge(out=out, sources=len(stores), result=result, notices=notices)


def _merge_into_dir(out: Path, combined: Manifest, target_bytes: bytes | None,
                    stores: list[SampleStore]) -> MergeResult:
    """Merge into an existing directory: the manifest first (a superset of the tasks, so rows
    copied next are all read), then one new shard (removed again if copying fails)."""
    if target_bytes is not None:
        write_target_copy(out, target_bytes)
    write_manifest(out, combined)
    return merge_into(SampleStore(out / "samples"), stores)


def _merge_into_new_dir(out: Path, combined: Manifest, target_bytes: bytes | None,
                        stores: list[SampleStore]) -> MergeResult:
    """Build the destination in a temporary directory beside it, then rename it into place:
    a merge that fails (disk full, Ctrl-C) leaves no half-made destination."""
    parent = out.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        build = Path(tempfile.mkdtemp(dir=parent, prefix=f".{out.name}.merging-"))
    except OSError as exc:
        raise InputError(f"{out}: cannot create the out directory ({exc.strerror or exc})") from None
    try:
        os.chmod(build, 0o777 & ~umask())  # mkdtemp makes 0700; an out directory is shared
        result = _merge_into_dir(build, combined, target_bytes, stores)
        try:
            os.rename(build, out)
        except OSError as exc:
            if out.exists():
                raise InputError(f"{out}: appeared while merging (another merge?); nothing was "
                                 "written, run again") from None
            raise write_error(out, exc) from None
    except BaseException:
        shutil.rmtree(build, ignore_errors=True)
        raise
    return result
