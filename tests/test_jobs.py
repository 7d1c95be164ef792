"""The sweep and status jobs without sampling: option checks, the status result and its table,
the engines' one interface, and the layering they rely on."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest
import sinter

from planner.errors import InputError
from planner.jobs.status import StatusReport, status_job
from planner.jobs.sweep import SamplingChoice
from planner.sampling import DaskEngine, LocalEngine, engine_for
from planner.store import SampleStore

PLANNER = Path(__file__).resolve().parent.parent / "planner"


def _stats(sid: str, shots: int, errors: int, d: int) -> sinter.TaskStats:
    meta = {"code": "repetition", "d": d, "basis": "z", "rounds": d, "axis": "joint", "factor": 1.0}
    return sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=meta, shots=shots,
                            errors=errors, seconds=0.5)


def test_sampling_choice_is_checked_before_anything_slow() -> None:
    assert SamplingChoice.checked(shard="2/3").shard == (2, 3)
    for kwargs, field in [({"shard": "1/2", "cluster": "local:1"}, "shard"),
                          ({"shard": "1/2", "precision": 0.1}, "shard"),
                          ({"workers": 2, "cluster": "local:1"}, "workers"),
                          ({"cluster": "nowhere"}, "cluster"),
                          ({"workers": 0}, "workers")]:
        with pytest.raises(InputError) as err:
            SamplingChoice.checked(**kwargs)
        assert err.value.field == field, kwargs


def test_engines_share_one_interface() -> None:
    from rich.console import Console

    quiet = Console(quiet=True)
    local = engine_for(workers=1, cluster=None, console=quiet)
    dask = engine_for(workers=None, cluster="local:1", console=quiet)
    assert isinstance(local, LocalEngine) and isinstance(dask, DaskEngine)
    for engine in (local, dask):
        assert all(callable(getattr(engine, m)) for m in ("__enter__", "__exit__", "prepare", "run"))
    with local:
        local.run([], lambda stats, chunk: None)  # nothing to sample: nothing starts


def test_status_result_is_typed_and_its_table_built_once(tmp_path: Path) -> None:
    with SampleStore(tmp_path).writer("a") as w:
        w.append(_stats("s5", 1000, 10, d=5))
        w.append(_stats("s3", 400, 20, d=3))
    report = status_job(tmp_path)
    assert isinstance(report, StatusReport)
    doc = report.to_json()
    assert [t["strong_id"] for t in doc["tasks"]] == ["s3", "s5"]  # sorted by distance
    assert doc["totals"] == {"tasks": 2, "done": 0, "shots": 1400, "errors": 30, "cpu_seconds": 1.0,
                             "cpu_seconds_left": 0}  # no budget recorded: nothing known left
    table = report.table()
    assert [c for c, _ in table.columns][:3] == ["task", "shots", "errors"]
    assert table.rows[0][:3] == ("repetition joint ×1 d=3 z", "400", "20")
    assert table.footer.startswith("total: 1,400 shots, 30 errors")


def test_sampling_imports_neither_store_nor_planning() -> None:
    """Layers point one way: sampling hands chunks to the store it is given (TYPE_CHECKING
    imports aside) and takes planning's assessment as a callable."""
    for path in (PLANNER / "sampling").glob("*.py"):
        tree = ast.parse(path.read_text())
        typing_only = {id(n) for node in ast.walk(tree) if isinstance(node, ast.If)
                       and "TYPE_CHECKING" in ast.unparse(node.test) for n in ast.walk(node)}
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and id(node) not in typing_only and node.module:
                assert not node.module.startswith(("planner.store", "planner.planning", "planner.fits",
                                                   "planner.jobs", "planner.precision_answers")), (path, node.module)
