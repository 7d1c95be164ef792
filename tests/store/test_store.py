"""The sample store and the manifest: no sampling, exact counts."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
import sinter
import stim

from planner.errors import InputError
from planner.store import Manifest, combine_manifests, identity_difference, prepare_out_dir, read_manifest
from planner.sweep import resolved_task
from planner.store import HEADER, SampleStore, merge_into, read_shard


def _stats(sid: str, shots: int, errors: int, d: int = 3) -> sinter.TaskStats:
    meta = {"code": "repetition", "d": d, "basis": "z", "rounds": d, "axis": "joint",
            "factor": 1.0, "scales": {"gate_2q": 1.0}}
    return sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=meta, shots=shots,
                            errors=errors, seconds=0.25)


def _fill(store: SampleStore, shard: str = "a") -> None:
    with store.writer(shard) as w:
        w.append(_stats("s1", 100, 3))
        w.append(_stats("s1", 200, 5))
        w.append(_stats("s2", 50, 1, d=5))


def _totals(store: SampleStore) -> dict[str, tuple[int, int]]:
    return {s.strong_id: (s.shots, s.errors) for s in store.stats()}


def _sinter_totals(store: SampleStore) -> dict[str, tuple[int, int]]:
    return {s.strong_id: (s.shots, s.errors)
            for s in sinter.read_stats_from_csv_files(*store.shard_files())}


EXPECTED = {"s1": (300, 8), "s2": (50, 1)}


def test_rows_sum_by_strong_id_and_sinter_reads_the_shards(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    _fill(store)
    assert store.samples_dir == tmp_path / "samples"
    assert _totals(store) == EXPECTED
    assert _sinter_totals(store) == EXPECTED  # the format contract: sinter's own reader agrees
    text = store.shard_files()[0].read_text().splitlines()
    assert text[0] == HEADER and len(text) == 4
    assert len({r.chunk_id for r in store.rows()}) == 3


def test_torn_last_line_is_skipped_then_cut_on_open(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    whole = shard.read_bytes()
    torn_row = (_stats("s1", 999, 9).to_csv_line() + ",deadbeef").encode()
    shard.write_bytes(whole + torn_row[:37])  # a writer killed inside write()
    assert _totals(store) == EXPECTED
    with store.writer("a") as w:  # reopening the shard repairs it
        assert w.repaired_bytes == 37
    assert shard.read_bytes() == whole
    assert _sinter_totals(store) == EXPECTED


def test_unparsable_last_line_is_cut_and_other_shards_repaired(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    whole = shard.read_bytes()
    shard.write_bytes(whole + b"\x00" * 20 + b"\n")  # zeros a crash can leave behind
    with store.writer("other") as w:  # opening any writer repairs idle shards
        w.append(_stats("s2", 10, 0, d=5))
    assert shard.read_bytes() == whole
    assert _totals(store) == {"s1": (300, 8), "s2": (60, 1)}


def test_a_bad_row_in_the_middle_is_an_input_error(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    lines = shard.read_text().splitlines(keepends=True)
    shard.write_text(lines[0] + "garbage,row\n" + "".join(lines[1:]))
    with pytest.raises(InputError, match=r"a\.csv:2"):
        store.stats()


def test_copied_shard_and_double_merge_do_not_double_count(tmp_path: Path) -> None:
    src = SampleStore(tmp_path / "src")
    _fill(src)
    shutil.copy(src.shard_files()[0], src.samples_dir / "copy-of-a.csv")
    assert _totals(src) == EXPECTED
    dest = SampleStore(tmp_path / "dest" / "samples")
    first = merge_into(dest, [src])
    assert (first.copied_rows, first.skipped_rows) == (3, 0)  # the copy was already deduplicated
    second = merge_into(dest, [src, dest])
    assert second.copied_rows == 0 and second.shard is None
    assert _totals(dest) == EXPECTED
    assert _sinter_totals(dest) == EXPECTED  # the destination holds each chunk once


def test_second_writer_on_one_shard_is_refused(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    with store.writer("shared") as w:
        w.append(_stats("s1", 1, 0))
        with pytest.raises(InputError, match=r"shared\.csv: another writer holds this shard"):
            with store.writer("shared"):
                pass
    with store.writer("shared") as w:  # free again once the first one closed
        w.append(_stats("s1", 1, 0))
    assert _totals(store) == {"s1": (2, 0)}


def test_default_shard_names_are_unique(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    with store.writer() as a, store.writer() as b:
        assert a.path != b.path


def test_chunk_ids_with_commas_are_rejected(tmp_path: Path) -> None:
    with SampleStore(tmp_path).writer() as w, pytest.raises(ValueError, match="commas"):
        w.append(_stats("s1", 1, 0), chunk_id="a,b")


def test_report_csvs_in_an_out_dir_are_not_shards(tmp_path: Path) -> None:
    store = SampleStore(tmp_path)
    _fill(store)
    (tmp_path / "requirements.csv").write_text("component,factor\ngate_2q,0.5\n")
    again = SampleStore(tmp_path)
    assert again.samples_dir == tmp_path / "samples"
    assert _totals(again) == EXPECTED


def test_plain_sinter_csv_is_read(tmp_path: Path) -> None:
    (tmp_path / "samples").mkdir()
    path = tmp_path / "samples" / "plain.csv"
    path.write_text(sinter.CSV_HEADER + "\n" + _stats("s1", 10, 2).to_csv_line() + "\n"
                    + _stats("s1", 5, 1).to_csv_line() + "\n")
    rows = read_shard(path)
    assert [r.chunk_id for r in rows] == ["plain.csv:2", "plain.csv:3"]
    assert _totals(SampleStore(tmp_path)) == {"s1": (15, 3)}


def _task(p: float) -> sinter.Task:
    circuit = stim.Circuit.generated("repetition_code:memory", distance=3, rounds=3,
                                     before_round_data_depolarization=p)
    return sinter.Task(circuit=circuit, decoder="pymatching", json_metadata={"p": p})


def _manifest(sha: str, tasks: list[sinter.Task]) -> Manifest:
    return Manifest.for_sweep(target_sha256=sha, target_name="t", tasks=tasks, budget="quick",
                              max_errors=10, max_shots=100)


@pytest.mark.slow
def test_strong_id_matches_what_sinter_reports() -> None:
    task = _task(0.05)
    stats = sinter.collect(num_workers=1, tasks=[resolved_task(task)], max_shots=10)
    assert stats[0].strong_id == resolved_task(task).strong_id()
    # a task without a model gets the one sinter's workers build, so ids agree either way
    other = sinter.collect(num_workers=1, tasks=[task], max_shots=10)
    assert other[0].strong_id == stats[0].strong_id


def test_manifest_refuses_another_target_or_versions(tmp_path: Path) -> None:
    tasks = [_task(0.05)]
    m = _manifest("a" * 64, tasks)
    prepare_out_dir(tmp_path, target_bytes=b"x = 1\n", manifest=m)
    assert read_manifest(tmp_path) == m
    assert (tmp_path / "target.toml").read_bytes() == b"x = 1\n"
    prepare_out_dir(tmp_path, target_bytes=b"x = 1\n", manifest=m)  # resuming is fine
    with pytest.raises(InputError, match="target file hash .* use another --out or delete"):
        prepare_out_dir(tmp_path, target_bytes=b"x = 2\n", manifest=_manifest("b" * 64, tasks))
    newer = Manifest(**{**m.__dict__, "versions": {**m.versions, "stim": "9.9"}})
    with pytest.raises(InputError, match="stim version"):
        prepare_out_dir(tmp_path, target_bytes=b"x = 1\n", manifest=newer)
    with pytest.raises(InputError, match="tasks differ"):
        prepare_out_dir(tmp_path, target_bytes=b"x = 1\n", manifest=_manifest("a" * 64, [_task(0.04)]))
    assert identity_difference(m, newer) is not None
    with pytest.raises(InputError, match="cannot be merged"):
        combine_manifests([("A", m), ("B", newer)])
    both = combine_manifests([("A", m), ("B", _manifest("a" * 64, [_task(0.04)]))])
    assert len(both.tasks) == 2
