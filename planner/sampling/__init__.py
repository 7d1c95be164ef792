"""Sampling: engines (local sinter, dask) behind one interface, the uniform and the
precision-targeted drivers on one set-up, the shot allocator, progress.

Sampling writes chunks to the store it is handed; it never imports the store, fits or planning
(the targeted driver takes planning's assessment as a callable: see
:func:`planner.jobs.sweep.run_targeted`).

Layout: ``work`` (work items, chunk ids, shards, worker counts), ``engine`` (the interface, local
engine), ``dask`` (reaching a cluster) and ``chunks`` (the dask engine's chunks), ``setup`` (the
shared set-up and sink), ``uniform`` and ``targeted`` (the drivers), ``allocate``, ``progress``,
``orphans`` (workers exit with their parent).
"""

from planner.sampling.allocate import Allocation, allocate
from planner.sampling.dask import (
                                       ClusterError,
                                       ClusterSpec,
                                       WorkerCount,
                                       connect,
                                       parse_cluster,
)
from planner.sampling.engine import (
                                       DaskEngine,
                                       Engine,
                                       LocalEngine,
                                       engine_for,
                                       run_local,
)
from planner.sampling.progress import SweepProgress
from planner.sampling.setup import ChunkCounts, SweepRecord, SweepSetup, sweep_setup
from planner.sampling.targeted import (
                                       MIN_ERRORS,
                                       Assess,
                                       TargetedLimits,
                                       TargetedSummary,
                                       run_targeted,
                                       shot_caps,
)
from planner.sampling.uniform import SweepSummary, items_to_sample, run_sweep
from planner.sampling.work import (
                                       ChunkSink,
                                       WorkItem,
                                       check_workers,
                                       default_workers,
                                       max_workers,
                                       new_chunk_id,
                                       parse_shard,
                                       remaining,
                                       shard_share,
                                       sharded_name,
)

__all__ = ["Allocation", "Assess", "ChunkCounts", "ChunkSink", "ClusterError", "ClusterSpec", "DaskEngine",
           "Engine", "LocalEngine", "MIN_ERRORS", "SweepProgress", "SweepRecord", "SweepSetup",
           "SweepSummary", "TargetedLimits", "TargetedSummary", "WorkItem", "WorkerCount", "allocate",
           "check_workers", "connect", "default_workers", "engine_for", "items_to_sample", "max_workers",
           "new_chunk_id", "parse_cluster", "parse_shard", "remaining", "run_local", "run_sweep",
           "run_targeted", "shard_share", "sharded_name", "shot_caps", "sweep_setup"]
