"""Data safety of the sample store and the out directory (issue 9): short writes and a full disk,
damaged rows left by a crash, files the store did not create, another target's rows, out
directories planner must not write into, a failed merge, hand-edited manifests and rows.

Library tests use exact counts (no sampling); command-line tests sample a tiny repetition-code
target once per module and copy the result."""

from __future__ import annotations

import errno
import json
import os
import re
import shutil
from collections.abc import Callable
from pathlib import Path

import pytest
import sinter
from typer.testing import CliRunner

from planner.cli import app
from planner.errors import InputError
from planner.store import read_manifest, write_manifest, write_target_copy
from planner.jobs.review import load_out_dir
from planner.store import HEADER, SampleStore
from tests.helpers.sampled import SampleOnce, copy_out
from tests.helpers.targets import TINY_REPETITION

runner = CliRunner()

TINY = TINY_REPETITION


# ---------------------------------------------------------------------------------------------
# helpers


def _stats(sid: str, shots: int, errors: int, d: int = 3) -> sinter.TaskStats:
    meta = {"code": "repetition", "d": d, "basis": "z", "rounds": d, "axis": "joint",
            "factor": 1.0, "scales": {"gate_2q": 1.0}}
    return sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=meta, shots=shots,
                            errors=errors, seconds=0.25)


def _totals(stats: list[sinter.TaskStats]) -> dict[str, tuple[int, int]]:
    return {s.strong_id: (s.shots, s.errors) for s in stats}


def _sinter_totals(store: SampleStore) -> dict[str, tuple[int, int]]:
    return _totals(sinter.read_stats_from_csv_files(*store.shard_files()))


def _quiet(root: Path) -> SampleStore:
    return SampleStore(root, notify=None)


def _fill(store: SampleStore, shard: str = "a") -> None:
    with store.writer(shard) as w:
        w.append(_stats("s1", 100, 3))
        w.append(_stats("s1", 200, 5))
        w.append(_stats("s2", 50, 1, d=5))


EXPECTED = {"s1": (300, 8), "s2": (50, 1)}


def _row(stats: sinter.TaskStats, chunk: str) -> bytes:
    return (stats.to_csv_line() + "," + chunk + "\n").encode()


class Faults:
    """os.write that misbehaves only for files under ``root``: each call takes the next action,
    ``("short", n)`` (write at most n bytes), ``("partial-then-fail", None)`` (write half the
    bytes; the next call fails), ``("fail", None)`` (raise ENOSPC), ``None`` (write normally)."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch, root: Path, *,
                 after: int = 0, actions: list | None = None, forever: tuple | None = None) -> None:
        self.real = os.write
        self.root = str(root.resolve())
        self.after = after  # writes under root that pass untouched first
        self.actions = list(actions or [])
        self.forever = forever
        self.hits = 0
        monkeypatch.setattr(os, "write", self)

    def _ours(self, fd: int) -> bool:
        try:
            return os.readlink(f"/proc/self/fd/{fd}").startswith(self.root)
        except OSError:
            return False

    def __call__(self, fd: int, data) -> int:
        if not self._ours(fd):
            return self.real(fd, data)
        if self.after > 0:
            self.after -= 1
            return self.real(fd, data)
        self.hits += 1
        action = self.actions.pop(0) if self.actions else self.forever
        if action is None:
            return self.real(fd, data)
        kind, n = action
        if kind == "short":
            return self.real(fd, bytes(data)[:n])
        if kind == "partial-then-fail":
            self.actions.insert(0, ("fail", None))
            return self.real(fd, bytes(data)[: max(1, len(data) // 2)])
        raise OSError(errno.ENOSPC, "No space left on device")


def _one_line_error(res) -> str:
    assert res.exit_code == 2, (res.exit_code, res.stdout, res.stderr)
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error:"), res.stderr
    assert "Traceback" not in res.stderr
    return lines[0]


def _no_tmp_files(root: Path) -> list[Path]:
    return [p for p in root.rglob("*") if p.name.endswith(".tmp") or ".merging-" in p.name]


# ---------------------------------------------------------------------------------------------
# 1. short writes and a full disk (library)


def test_short_writes_are_continued_until_the_row_is_whole(tmp_path: Path, monkeypatch) -> None:
    store = _quiet(tmp_path)
    faults = Faults(monkeypatch, tmp_path, forever=("short", 7))
    _fill(store)
    assert faults.hits > 10  # every row really went out in pieces
    monkeypatch.undo()
    assert _totals(store.stats()) == EXPECTED
    assert _sinter_totals(store) == EXPECTED


@pytest.mark.parametrize("action", [("partial-then-fail", None), ("fail", None)])
def test_disk_full_mid_row_is_cut_back_and_raised(tmp_path: Path, monkeypatch, action) -> None:
    store = _quiet(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    before = shard.read_bytes()
    with pytest.raises(InputError, match=r"a\.csv: disk full .*free space and run again"):
        with store.writer("a") as w:
            Faults(monkeypatch, tmp_path, actions=[action])
            w.append(_stats("s1", 999, 9))  # this chunk cannot be saved
    monkeypatch.undo()
    assert shard.read_bytes() == before  # no half row left behind
    assert _totals(store.stats()) == EXPECTED == _sinter_totals(store)
    with store.writer("a") as w:  # the store goes on once there is room again
        w.append(_stats("s2", 10, 0, d=5))
    assert _totals(store.stats()) == {"s1": (300, 8), "s2": (60, 1)} == _sinter_totals(store)


def test_disk_full_while_creating_a_shard(tmp_path: Path, monkeypatch) -> None:
    store = _quiet(tmp_path)
    Faults(monkeypatch, tmp_path, actions=[("partial-then-fail", None)])
    with pytest.raises(InputError, match="disk full"), store.writer("new"):
        pass
    monkeypatch.undo()
    assert [p.stat().st_size for p in (tmp_path / "samples").iterdir()] == [0]  # no torn header
    assert store.stats() == []
    _fill(store, "new")
    assert _totals(store.stats()) == EXPECTED == _sinter_totals(store)


@pytest.mark.parametrize("write", [
    lambda d, m: write_manifest(d, m),
    lambda d, m: write_target_copy(d, b"x = 2\n", replace=True),
], ids=["manifest", "target-copy"])
def test_disk_full_in_an_atomic_write_leaves_the_old_file_and_no_tmp(
        tmp_path: Path, monkeypatch, write: Callable) -> None:
    from planner.store import Manifest

    m = Manifest(target_sha256="a" * 64, target_name="t", versions={"stim": "1"}, tasks=())
    write_manifest(tmp_path, m)
    write_target_copy(tmp_path, b"x = 1\n")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    Faults(monkeypatch, tmp_path, actions=[("partial-then-fail", None)])
    with pytest.raises(InputError, match=r"(manifest\.json|target\.toml): disk full"):
        write(tmp_path, m)
    monkeypatch.undo()
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before
    assert _no_tmp_files(tmp_path) == []


# ---------------------------------------------------------------------------------------------
# 1. a store a crash left with a damaged row mid-file recovers by itself


def _glued_shard(tmp_path: Path, cut: int) -> tuple[SampleStore, Path, bytes]:
    """A shard as the old writer left it on a nearly full disk: a short write of one row (its
    first ``cut`` bytes) and the next row appended right after it, then one more row."""
    store = _quiet(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    torn = _row(_stats("s1", 7000, 70), "1" * 32)
    glued = torn[:cut] + _row(_stats("s2", 4000, 40, d=5), "2" * 32)
    shard.write_bytes(shard.read_bytes() + glued + _row(_stats("s2", 5, 1, d=5), "3" * 32))
    return store, shard, glued


# cut points: inside the shots digits, inside the strong id, inside the quoted metadata, at its end
@pytest.mark.parametrize("cut", [8, 12, 60, 75, 110, -1])
def test_a_torn_row_glued_to_the_next_is_never_merged_and_is_set_aside(tmp_path: Path, cut: int) -> None:
    torn_len = len(_row(_stats("s1", 7000, 70), "1" * 32))
    cut = cut if cut > 0 else torn_len - 1  # all but the newline
    store, shard, glued = _glued_shard(tmp_path, cut)
    want = {"s1": (300, 8), "s2": (55, 2)}  # the glued line counts for nothing
    assert _totals(store.stats()) == want  # readers skip it, and say so
    assert any("damaged row" in n and "line 5" in n for n in store.notices), store.notices
    assert not (shard.parent / "a.csv.rejected").exists()  # reading changes nothing
    with store.writer("other"):  # a writer repairs idle shards: the row goes to the side file
        pass
    assert (shard.parent / "a.csv.rejected").read_bytes().endswith(glued)
    assert glued not in shard.read_bytes()
    assert any("set aside 1 damaged row" in n for n in store.notices), store.notices
    assert _totals(store.stats()) == want == _sinter_totals(store)  # sinter reads the shard again


def test_nul_bytes_mid_file_are_set_aside_by_a_reader_of_the_out_dir(tmp_path: Path) -> None:
    store = _quiet(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    lines = shard.read_bytes().splitlines(keepends=True)
    shard.write_bytes(b"".join(lines[:2]) + b"\x00" * 40 + b"\n" + b"".join(lines[2:]))
    with pytest.raises(ValueError):  # what every command and sinter met before the repair
        sinter.read_stats_from_csv_files(shard)
    removed = store.repair()
    assert removed == 41
    assert (shard.parent / "a.csv.rejected").read_bytes().endswith(b"\x00" * 40 + b"\n")
    assert _totals(store.stats()) == EXPECTED == _sinter_totals(store)


# ---------------------------------------------------------------------------------------------
# Bad input: a sample row edited by hand is refused with the file and the line, never moved


HAND_EDITS = {
    "string-for-number": lambda row: row.replace(b"         3,", b"     three,", 1),
    "non-utf8": lambda row: row.replace(b",s1,", b",s\xff\xfe1,", 1),
    "huge-field": lambda row: row.replace(b",s1,", b"," + b"s" * 300_000 + b",", 1),
    "deep-json": lambda row: row.replace(b'"{', b'"' + b"[" * 50_000 + b"]" * 50_000 + b'{', 1),
    "missing-field": lambda row: row.replace(b",pymatching", b"", 1),
    "negative-shots": lambda row: row.replace(b"       100,", b"      -100,", 1),
    "extra-field": lambda row: row.replace(b"\n", b",surplus\n", 1),
}


@pytest.mark.parametrize("edit", sorted(HAND_EDITS))
def test_a_hand_edited_row_is_one_line_naming_file_and_line(tmp_path: Path, edit: str) -> None:
    store = _quiet(tmp_path)
    _fill(store)
    shard = store.shard_files()[0]
    lines = shard.read_bytes().splitlines(keepends=True)
    edited = HAND_EDITS[edit](lines[1])
    assert edited != lines[1]
    shard.write_bytes(lines[0] + edited + b"".join(lines[2:]))
    with pytest.raises(InputError, match=r"a\.csv:2: unreadable sample row: .*fix or delete") as exc:
        store.stats()
    assert "\n" not in str(exc.value) and len(str(exc.value)) < 400
    with store.writer("other"):  # a repair never moves what may be a person's edit
        pass
    assert shard.read_bytes() == lines[0] + edited + b"".join(lines[2:])
    assert not (shard.parent / "a.csv.rejected").exists()


# ---------------------------------------------------------------------------------------------
# 2. files the store did not create are never modified


FOREIGN = {
    "notes.csv": b"name,value\nalpha,1\nbeta,2\ngamma,",  # a torn-looking last line
    "my table.csv": HEADER.encode() + b"\n" + b"\x00" * 10 + b"\n",  # our header, not our name
    "plain.csv": (sinter.CSV_HEADER + "\n" + _stats("s1", 10, 1).to_csv_line() + "\n"
                  + _stats("s1", 3, 0).to_csv_line()[:20]).encode(),  # sinter's, torn tail
}


def test_foreign_files_are_never_modified(tmp_path: Path) -> None:
    store = SampleStore(tmp_path, notify=None)
    _fill(store)
    for name, data in FOREIGN.items():
        (store.samples_dir / name).write_bytes(data)
    for _ in range(3):  # each writer repairs idle shards: none of these is one
        with store.writer("b") as w:
            w.append(_stats("s2", 1, 0, d=5))
    store.repair()
    for name, data in FOREIGN.items():
        assert (store.samples_dir / name).read_bytes() == data, name
    assert not list(store.samples_dir.glob("*.rejected"))
    # the plain sinter file is read (its torn tail skipped); 'my table.csv' is damaged, skipped
    assert _totals(store.stats()) == {"s1": (310, 9), "s2": (53, 1)}
    assert any("notes.csv: not a sample file" in n and "left untouched" in n for n in store.notices)
    assert store.read().foreign_files == (store.samples_dir / "notes.csv",)


def test_a_writer_refuses_to_take_over_a_foreign_file(tmp_path: Path) -> None:
    store = _quiet(tmp_path)
    store.samples_dir.mkdir(parents=True)
    notes = store.samples_dir / "notes.csv"
    notes.write_bytes(FOREIGN["notes.csv"])
    with pytest.raises(InputError, match="notes.csv: exists and is not a planner sample shard"):
        with store.writer("notes"):
            pass
    assert notes.read_bytes() == FOREIGN["notes.csv"]


# ---------------------------------------------------------------------------------------------
# command line: one tiny sweep per module, copied per test


def _target(root: Path, p: float, name: str = "tiny.toml") -> Path:
    path = root / name
    path.write_text(TINY.format(p=p))
    return path


@pytest.fixture(scope="module")
def swept(tmp_path_factory: pytest.TempPathFactory, sample_once: SampleOnce) -> dict[str, Path]:
    root = tmp_path_factory.mktemp("hardening")
    made = {}
    for key, p in (("mine", 0.02), ("other", 0.03)):
        sampled = sample_once(TINY.format(p=p), workers=2)  # `sweep TARGET --out OUT --workers 2`
        made[key], made[f"{key}_target"] = copy_out(sampled, root / key), sampled.target
    return made


def _copy(swept: dict[str, Path], tmp_path: Path, key: str = "mine") -> Path:
    out = tmp_path / key
    shutil.copytree(swept[key], out)
    return out


def _status_totals(out: Path) -> dict[str, tuple[int, int]]:
    res = runner.invoke(app, ["status", str(out), "--json"])
    assert res.exit_code == 0, res.stderr
    return {t["strong_id"]: (t["shots"], t["errors"]) for t in json.loads(res.stdout)["tasks"] if t["shots"]}


def test_sweep_on_a_full_disk_is_one_line_and_resumes(swept, tmp_path: Path, monkeypatch) -> None:
    target = swept["mine_target"]
    out = tmp_path / "full"
    # header and two rows fit; the third row is torn by a short write, then the disk is full
    Faults(monkeypatch, out / "samples", after=3, actions=[("partial-then-fail", None)])
    line = _one_line_error(runner.invoke(app, ["sweep", str(target), "--out", str(out),
                                               "--workers", "1", "--quiet"]))
    monkeypatch.undo()
    assert "disk full" in line and "free space and run again" in line
    assert _no_tmp_files(out) == []
    store = _quiet(out)
    assert len(list(store.rows())) == 2
    assert _totals(store.stats()) == _sinter_totals(store)  # nothing torn, nothing lost
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1", "--quiet"])
    assert res.exit_code == 0, res.stderr
    assert _status_totals(out) == _sinter_totals(_quiet(out))


def test_disk_full_before_sampling_leaves_no_tmp_files(swept, tmp_path: Path, monkeypatch) -> None:
    out = tmp_path / "full"
    Faults(monkeypatch, out, forever=("fail", None))
    line = _one_line_error(runner.invoke(app, ["sweep", str(swept["mine_target"]), "--out", str(out),
                                               "--quiet"]))
    monkeypatch.undo()
    assert "disk full" in line
    assert _no_tmp_files(out) == [] and not (out / "manifest.json").exists()


def test_fit_and_status_ignore_another_targets_rows_and_say_so(swept, tmp_path: Path) -> None:
    out = _copy(swept, tmp_path)
    before_fit = runner.invoke(app, ["fit", str(out), "--json"])
    assert before_fit.exit_code == 0, before_fit.stderr
    before_status = _status_totals(out)
    copied = 0
    for k, shard in enumerate(sorted((swept["other"] / "samples").glob("*.csv"))):
        shutil.copy(shard, out / "samples" / f"from-other-{k}.csv")
        copied += len(shard.read_text().splitlines()) - 1
    res = runner.invoke(app, ["fit", str(out), "--json"])
    assert res.exit_code == 0, res.stderr
    assert json.loads(res.stdout)["tasks"] == json.loads(before_fit.stdout)["tasks"]
    assert f"ignored {copied} row(s) of tasks" in res.stderr
    assert _status_totals(out) == before_status
    loaded = load_out_dir(out, notify=None)
    assert loaded.ignored_rows == copied and any("ignored" in n for n in loaded.notices)
    target, stats = loaded  # still unpacks as before
    assert _totals(stats) == before_status


def test_fit_of_plain_sinter_rows_is_one_line(swept, tmp_path: Path) -> None:
    out = tmp_path / "plain"
    (out / "samples").mkdir(parents=True)
    shutil.copy(swept["mine"] / "target.toml", out / "target.toml")
    rows = [_stats("feed", 1000, 3).with_edits(json_metadata={"p": 0.01})]
    (out / "samples" / "sinter.csv").write_text(
        sinter.CSV_HEADER + "\n" + "".join(r.to_csv_line() + "\n" for r in rows))
    assert "manifest.json: missing" in _one_line_error(runner.invoke(app, ["fit", str(out)]))
    shutil.copy(swept["mine"] / "manifest.json", out / "manifest.json")
    line = _one_line_error(runner.invoke(app, ["fit", str(out)]))
    assert "no samples yet (1 rows of other tasks ignored)" in line


def test_fit_sets_a_damaged_row_aside_and_goes_on(swept, tmp_path: Path) -> None:
    out = _copy(swept, tmp_path)
    before = _status_totals(out)
    shard = sorted((out / "samples").glob("*.csv"))[0]
    lines = shard.read_bytes().splitlines(keepends=True)
    glued = lines[1][:40] + lines[2]  # a torn row, the next row written right after it
    shard.write_bytes(lines[0] + glued + b"".join(lines[3:]) + lines[1] + lines[2])
    res = runner.invoke(app, ["fit", str(out)])
    assert res.exit_code == 0, res.stderr
    assert "set aside 1 damaged row(s)" in res.stderr
    assert shard.with_name(shard.name + ".rejected").read_bytes().endswith(glued)
    assert _status_totals(out) == before == _sinter_totals(_quiet(out))


@pytest.mark.parametrize(("edit", "needle"), [
    (lambda t: t.replace('"max_errors": ', '"max_errors": "ten", "x": ', 1), r"manifest\.json:\d+: max_errors"),
    (lambda t: t.replace('"target_name": "', '"target_name": "\udcff', 1), r"manifest\.json:\d+: not UTF-8"),
    (lambda t: t.replace('"tasks": [', '"tasks": [' + "[" * 5000 + "]" * 5000 + ",", 1),
     r"manifest\.json:\d+: JSON nested more than"),
    (lambda t: t.replace('"strong_id": "', '"strong_id": 7, "x": "', 1), r"manifest\.json:\d+: strong_id"),
    (lambda t: t[: len(t) // 2], r"manifest\.json:\d+: not valid JSON"),
], ids=["string-for-number", "non-utf8", "deep", "number-for-string", "cut"])
def test_a_hand_edited_manifest_is_one_line_naming_file_and_line(swept, tmp_path: Path, edit, needle) -> None:
    out = _copy(swept, tmp_path)
    path = out / "manifest.json"
    path.write_bytes(edit(path.read_text()).encode("utf-8", errors="surrogateescape"))
    for command in ("fit", "status", "sweep"):
        args = [command, str(out)] if command != "sweep" else [command, str(swept["mine_target"]), "--out", str(out)]
        line = _one_line_error(runner.invoke(app, args))
        assert re.search(needle, line), (command, line)


def test_a_huge_manifest_is_refused_before_it_is_read(swept, tmp_path: Path, monkeypatch) -> None:
    import planner.store.manifest

    out = _copy(swept, tmp_path)
    size = (out / "manifest.json").stat().st_size
    monkeypatch.setattr(planner.store.manifest, "MAX_MANIFEST_BYTES", size - 1)  # as if it were huge
    with pytest.raises(InputError, match=r"manifest\.json: .* bytes is too large for a planner manifest"):
        read_manifest(out)


def test_sweep_leaves_a_foreign_csv_in_samples_alone(swept, tmp_path: Path) -> None:
    out = _copy(swept, tmp_path)
    notes = out / "samples" / "notes.csv"
    notes.write_bytes(FOREIGN["notes.csv"])
    for _ in range(2):
        res = runner.invoke(app, ["sweep", str(swept["mine_target"]), "--out", str(out), "--budget", "standard",
                                  "--workers", "1", "--quiet"])
        assert res.exit_code == 0, res.stderr
        assert "notes.csv: not a sample file" in res.stderr
    assert notes.read_bytes() == FOREIGN["notes.csv"]


# ---------------------------------------------------------------------------------------------
# 8. out directories planner must not write into


def _guard_root(monkeypatch: pytest.MonkeyPatch) -> None:
    """Make any file or directory planner would create in / (or /samples) fail, so this test
    cannot litter the machine even when the refusal it checks is missing."""
    real_open, real_mkdir = os.open, os.mkdir

    def forbidden(path) -> bool:
        parent = os.path.dirname(os.path.abspath(os.fsdecode(path)))
        return parent in ("/", "/samples", "/verify", "/plots")

    def guarded_open(path, flags, *args, **kwargs):
        if flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT) and forbidden(path):
            raise PermissionError(13, "test guard: no writes in /", os.fsdecode(path))
        return real_open(path, flags, *args, **kwargs)

    def guarded_mkdir(path, *args, **kwargs):
        if forbidden(path):
            raise PermissionError(13, "test guard: no writes in /", os.fsdecode(path))
        return real_mkdir(path, *args, **kwargs)

    monkeypatch.setattr(os, "open", guarded_open)
    monkeypatch.setattr(os, "mkdir", guarded_mkdir)


def test_out_dir_root_empty_cwd_and_foreign_are_refused(swept, tmp_path: Path, monkeypatch) -> None:
    _guard_root(monkeypatch)
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    target = _target(work, 0.02)
    dots = _target(work, 0.02, name="...toml")  # its stem is '..': out/.. is the current directory
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "thesis.tex").write_text("mine\n")
    cases = [
        (["sweep", str(target), "--out", "/"], "file-system root"),
        (["run", str(target), "--out", "/"], "file-system root"),
        (["sweep", str(target), "--out", ""], "current directory"),
        (["run", str(target), "--out", ""], "current directory"),
        (["sweep", str(dots)], "current directory"),
        (["run", str(dots)], "current directory"),
        (["sweep", str(target), "--out", str(busy)], "already holds files planner did not write ('thesis.tex')"),
        (["run", str(target), "--out", str(busy)], "already holds files planner did not write"),
        (["merge", str(swept["mine"]), "--out", "/"], "file-system root"),
        (["merge", str(swept["mine"]), "--out", str(busy)], "already holds files planner did not write"),
    ]
    for args, needle in cases:
        res = runner.invoke(app, args)
        assert res.exit_code == 2, args
        assert needle in _one_line_error(res), args
    assert sorted(p.name for p in work.iterdir()) == ["...toml", "tiny.toml"]  # nothing written here
    assert sorted(p.name for p in busy.iterdir()) == ["thesis.tex"]


def test_an_empty_or_planner_out_dir_is_accepted(swept, tmp_path: Path) -> None:
    empty = tmp_path / "empty"
    empty.mkdir()
    res = runner.invoke(app, ["sweep", str(swept["mine_target"]), "--out", str(empty), "--workers", "1", "--quiet"])
    assert res.exit_code == 0, res.stderr
    out = _copy(swept, tmp_path)
    (out / "notes.txt").write_text("a planner out directory may hold the user's notes\n")
    res = runner.invoke(app, ["sweep", str(swept["mine_target"]), "--out", str(out)])
    assert res.exit_code == 0 and "nothing to sample" in res.stderr, res.stderr


def test_a_failed_merge_leaves_no_half_made_destination(swept, tmp_path: Path, monkeypatch) -> None:
    a = _copy(swept, tmp_path)
    dest = tmp_path / "dest"
    Faults(monkeypatch, tmp_path, after=2, actions=[("partial-then-fail", None)])
    line = _one_line_error(runner.invoke(app, ["merge", str(a), "--out", str(dest)]))
    monkeypatch.undo()
    assert "disk full" in line
    assert not dest.exists()
    assert _no_tmp_files(tmp_path) == []
    # merging into an existing directory: the half-copied shard is removed again
    same = tmp_path / "same"
    shutil.copytree(a, same)
    shutil.rmtree(same / "samples")
    (same / "samples").mkdir()
    Faults(monkeypatch, same / "samples", after=3, actions=[("partial-then-fail", None)])
    line = _one_line_error(runner.invoke(app, ["merge", str(a), "--out", str(same)]))
    monkeypatch.undo()
    assert "disk full" in line
    assert list((same / "samples").iterdir()) == []  # no half copy left
    res = runner.invoke(app, ["merge", str(a), "--out", str(same)])
    assert res.exit_code == 0, res.stderr
    assert _status_totals(same) == _status_totals(a) == _sinter_totals(_quiet(same))
    assert read_manifest(same) is not None
