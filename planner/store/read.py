"""Reading an out directory back: its target copy and the summed samples of its manifest's tasks."""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import sinter

from planner.config import Target, load_target
from planner.errors import InputError
from planner.store.manifest import MANIFEST, TARGET_COPY
from planner.store.shards import SampleStore, print_notice
from planner.store.outdir import require_out_dir


@dataclasses.dataclass(frozen=True)
class OutDirSamples:
    """An out directory's target copy and summed samples (only the manifest's tasks).

    Unpacks as ``target, stats = read_out_dir(d)``. ``ignored_rows``: rows of tasks the manifest
    does not list (another target's samples copied in); ``damaged_rows``: rows torn by an
    interrupted write (set aside or skipped); ``notices``: what the store said about them.
    """

    target: Target
    stats: list[sinter.TaskStats]
    ignored_rows: int = 0
    damaged_rows: int = 0
    notices: tuple[str, ...] = ()

    def __iter__(self) -> Iterator[Any]:
        return iter((self.target, self.stats))


def read_out_dir(directory: str | Path, *, notify: Callable[[str], None] | None | str = "stderr") -> OutDirSamples:
    """The target copy and the summed samples of an out directory (InputError if unusable).

    Only the tasks the manifest lists are read; damaged rows of idle shards are set aside
    first (see :mod:`planner.store.shards`). ``notify``: called with each notice (default: one
    line on stderr; None: quiet, the notices are on the result).
    """
    root = require_out_dir(directory, hint=" (run `planner sweep` or `planner run` first)")
    tpath = root / TARGET_COPY
    if not tpath.is_file():
        raise InputError(f"{tpath}: missing: {root} is not a planner out directory")
    if not (root / MANIFEST).is_file():
        raise InputError(f"{root / MANIFEST}: missing: {root} is not a planner out directory "
                         f"(samples without planner's manifest cannot be fitted; run `planner sweep "
                         f"{tpath} --out {root}`)")
    target = load_target(tpath)
    store = SampleStore(root, notify=None)  # said below, once the answer is not an error
    try:
        store.repair()
    except InputError as exc:  # e.g. a full disk: reading still works, the rows are skipped
        store.note(f"could not repair the samples: {exc}")
    read = store.read()
    stats = [s for s in read.stats() if s.shots > 0]
    if not stats:
        other = f" ({read.ignored_rows} rows of other tasks ignored)" if read.ignored_rows else ""
        raise InputError(f"{root / 'samples'}: no samples yet{other} (run `planner sweep {tpath}` first)")
    say = print_notice if notify == "stderr" else notify
    for message in store.notices if callable(say) else ():
        say(message)
    return OutDirSamples(target=target, stats=stats, ignored_rows=read.ignored_rows,
                         damaged_rows=read.damaged_rows, notices=tuple(store.notices))
