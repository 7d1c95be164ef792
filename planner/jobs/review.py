"""The review job: read an out directory (through :mod:`planner.store`) and plan from it.

Planning itself is pure (:mod:`planner.planning` never touches files); this job is where the
out directory's target copy and samples are read and handed to it.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import sinter

from planner.config import Target, load_target
from planner.errors import InputError
from planner.planning import Answers, answer_all
from planner.planning.ask import what_if
from planner.planning.uncertainty import DEFAULT_REPLICAS

__all__ = ["OutDirSamples", "Review", "load_out_dir", "review"]


@dataclasses.dataclass(frozen=True, kw_only=True)
class OutDirSamples:
    """An out directory's target copy and summed samples (only the manifest's tasks).

    Unpacks as ``target, stats = load_out_dir(d)``. ``ignored_rows``: rows of tasks the manifest
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


def _check_out_dir(root: Path) -> Path:
    """The target copy of a planner out directory (InputError naming what is missing)."""
    from planner.manifest import MANIFEST

    if not root.is_dir():
        raise InputError(f"{root}: no such out directory (run `planner sweep` or `planner run` first)")
    tpath = root / "target.toml"
    if not tpath.is_file():
        raise InputError(f"{tpath}: missing: {root} is not a planner out directory")
    if not (root / MANIFEST).is_file():
        raise InputError(f"{root / MANIFEST}: missing: {root} is not a planner out directory "
                         f"(samples without planner's manifest cannot be fitted; run `planner sweep "
                         f"{tpath} --out {root}`)")
    return tpath


def load_out_dir(directory: str | Path, *,
                 notify: Callable[[str], Any] | str | None = "stderr") -> OutDirSamples:
    """The target copy and the summed samples of an out directory (InputError if unusable).

    Only the tasks the manifest lists are read; damaged rows of idle shards are set aside
    first (see :mod:`planner.store`). ``notify``: called with each notice (default: one line
    on stderr; None: quiet, the notices are on the result).
    """
    from planner.store import SampleStore, print_notice

    root = Path(directory)
    tpath = _check_out_dir(root)
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


@dataclasses.dataclass(frozen=True, kw_only=True)
class Review:
    """An out directory planned: its target, the answers, and the question asked.

    ``what_if``: the options that ask another question than the target's goal (empty: the
    review's own question, the one the out directory's report files answer).
    """

    target: Target
    answers: Answers
    what_if: dict[str, Any] = dataclasses.field(default_factory=dict)


def review(directory: str | Path, *, eps_target: float | None = None, distance: int | None = None,
           qubits: int | None = None, replicas: int = DEFAULT_REPLICAS, seed: int = 0) -> Review:
    """Read ``directory`` and answer every question for its goal (or the what-if asked)."""
    target, stats = load_out_dir(directory)
    asked = what_if(target, eps_target=eps_target, distance=distance, qubits=qubits)
    answers = answer_all(target, stats, replicas=replicas, seed=seed, **asked)
    return Review(target=target, answers=answers, what_if=asked)
