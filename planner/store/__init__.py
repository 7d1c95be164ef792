"""The store: an out directory's append-only sample shards, its manifest and target copy, its
lock, merging, and reading it back.

Layout: ``shardfile`` (one shard's format, scan and repair), ``writer`` (appending whole rows),
``shards`` (:class:`SampleStore`: the shards of one directory), ``manifest`` (the sweep's
identity), ``outdir`` (where planner may write, the sweep's set-up, the sampling lock),
``lock``, ``merge``, ``read`` (:func:`read_out_dir`), ``fileio`` (whole and atomic writes: the
one :func:`atomic_write`).
"""

from planner.store.fileio import atomic_write, write_error
from planner.store.lock import LOCK_NAME, out_dir_lock
from planner.store.manifest import (
                                    MANIFEST,
                                    TARGET_COPY,
                                    Manifest,
                                    TaskEntry,
                                    combine_manifests,
                                    identity_difference,
                                    read_manifest,
                                    software_versions,
                                    write_manifest,
)
from planner.store.merge import (
                                    DirectoryMerge,
                                    MergeResult,
                                    merge_directories,
                                    merge_into,
)
from planner.store.outdir import (
                                    PLANNER_ENTRIES,
                                    check_out_dir,
                                    prepare_out_dir,
                                    prepare_sweep_dir,
                                    require_out_dir,
                                    sampling_lock,
                                    target_bytes_of,
                                    writable_dir,
                                    write_target_copy,
)
from planner.store.read import OutDirSamples, read_out_dir
from planner.store.shardfile import HEADER, SampleRow, read_shard
from planner.store.shards import (
                                    SampleStore,
                                    StoreRead,
                                    default_shard_name,
                                    new_chunk_id,
                                    print_notice,
                                    sharded_name,
)
from planner.store.writer import ShardWriter

__all__ = ["HEADER", "LOCK_NAME", "MANIFEST", "Manifest", "MergeResult", "DirectoryMerge", "OutDirSamples",
           "PLANNER_ENTRIES", "SampleRow", "SampleStore", "ShardWriter", "StoreRead", "TARGET_COPY",
           "TaskEntry", "atomic_write", "check_out_dir", "combine_manifests", "default_shard_name",
           "identity_difference", "merge_directories", "merge_into", "new_chunk_id", "out_dir_lock",
           "prepare_out_dir", "prepare_sweep_dir", "print_notice", "read_manifest", "read_out_dir", "require_out_dir",
           "read_shard", "sampling_lock", "sharded_name", "software_versions", "target_bytes_of",
           "writable_dir", "write_error", "write_manifest", "write_target_copy"]
