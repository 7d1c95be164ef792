"""`planner sweep`, `planner merge`, `planner status` through the command line."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
import sinter
from typer.testing import CliRunner

from planner.cli import app
from tests.helpers.sampled import SampleOnce, copy_out
from tests.helpers.targets import TINY_REPETITION

TINY = TINY_REPETITION

runner = CliRunner()


def _target(tmp_path: Path, p: float = 0.02, name: str = "tiny.toml") -> Path:
    path = tmp_path / name
    path.write_text(TINY.format(p=p))
    return path


def _status(out: Path) -> dict:
    res = runner.invoke(app, ["status", str(out), "--json"])
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def _one_line_error(res) -> str:
    assert res.exit_code == 2, (res.stdout, res.stderr)
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error:"), res.stderr
    return lines[0]


@pytest.fixture(scope="module")
def swept(tmp_path_factory: pytest.TempPathFactory, sample_once: SampleOnce) -> tuple[Path, Path]:
    tmp = tmp_path_factory.mktemp("swept")
    sampled = sample_once(TINY.format(p=0.02), workers=2)  # `sweep TARGET --out OUT --workers 2`
    return sampled.target, copy_out(sampled, tmp / "out")


def test_sweep_writes_manifest_target_copy_and_status_matches_sinter(swept) -> None:
    target, out = swept
    assert (out / "target.toml").read_bytes() == target.read_bytes()
    manifest = json.loads((out / "manifest.json").read_text())
    assert set(manifest["versions"]) == {"stim", "sinter", "pymatching"}
    assert manifest["budget"]["name"] == "quick"
    doc = _status(out)
    assert doc["totals"]["tasks"] == 8 == doc["totals"]["done"]  # 2 d x 2 points x round counts d, 3d
    shards = sorted((out / "samples").glob("*.csv"))
    theirs = {s.strong_id: (s.shots, s.errors) for s in sinter.read_stats_from_csv_files(*shards)}
    ours = {t["strong_id"]: (t["shots"], t["errors"]) for t in doc["tasks"]}
    assert ours == theirs  # the status totals are what sinter's own reader sums
    assert {t["metadata"]["d"] for t in doc["tasks"]} == {3, 5}
    for t in doc["tasks"]:
        # a 95% interval on n errors is about 2*1.96/sqrt(n) wide, relative (normal
        # approximation; common practice, no source)
        assert t["errors"] >= manifest["budget"]["max_errors"] or t["shots"] >= manifest["budget"]["max_shots"]
        assert t["relative_width"] == pytest.approx(3.92 / t["errors"] ** 0.5, rel=0.15)


def test_rerun_samples_nothing_and_says_so(swept) -> None:
    target, out = swept
    before = _status(out)["totals"]
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out)])
    assert res.exit_code == 0
    assert "nothing to sample" in res.stderr and res.stdout == ""
    assert _status(out)["totals"] == before


def test_status_table(swept) -> None:
    _, out = swept
    res = runner.invoke(app, ["status", str(out)])
    assert res.exit_code == 0 and "8/8 tasks done" in res.stdout and "budget 'quick'" in res.stdout


def test_changed_target_is_refused_and_samples_untouched(swept, tmp_path: Path) -> None:
    target, out = swept
    before = _status(out)["totals"]
    changed = _target(tmp_path, p=0.021, name=target.name)
    line = _one_line_error(runner.invoke(app, ["sweep", str(changed), "--out", str(out)]))
    assert "the device changed: device.preset.p 0.02 vs 0.021" in line and "use another --out or delete" in line
    assert _status(out)["totals"] == before


@pytest.mark.slow
def test_shards_then_merge_twice(tmp_path: Path) -> None:
    target = _target(tmp_path, p=0.03)
    a, b, c = tmp_path / "a", tmp_path / "b", tmp_path / "c"
    for k, out in ((1, a), (2, b)):
        res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--shard", f"{k}/2",
                                  "--workers", "1", "--quiet"])
        assert res.exit_code == 0, res.stderr
        assert [p.name for p in (out / "samples").glob("*.csv")] == [f"shard-{k}-of-2.csv"]
    sa, sb = _status(a), _status(b)
    sampled = lambda doc: {t["strong_id"]: t["shots"] for t in doc["tasks"] if t["shots"]}  # noqa: E731
    assert not set(sampled(sa)) & set(sampled(sb)) and len(sampled(sa) | sampled(sb)) == 8
    for _ in range(2):  # merging twice must not double count
        res = runner.invoke(app, ["merge", str(a), str(b), "--out", str(c)])
        assert res.exit_code == 0, res.stderr
    assert "0 new chunks" in res.stderr
    sc = _status(c)
    assert sampled(sc) == sampled(sa) | sampled(sb)
    assert sc["totals"]["done"] == 8
    other = _target(tmp_path, p=0.04, name="other.toml")
    d = tmp_path / "d"
    assert runner.invoke(app, ["sweep", str(other), "--out", str(d), "--quiet"]).exit_code == 0
    line = _one_line_error(runner.invoke(app, ["merge", str(a), str(d), "--out", str(c)]))
    assert "cannot be merged" in line


def test_bad_inputs_are_one_line(tmp_path: Path) -> None:
    target = _target(tmp_path)
    empty = tmp_path / "empty"
    empty.mkdir()
    cases = [
        (["status", str(tmp_path / "missing")], "no such out directory"),
        (["status", str(empty)], "holds no samples"),
        (["merge", str(empty), "--out", str(tmp_path / "m")], "no manifest.json"),
        (["sweep", str(target), "--shard", "2"], "--shard"),
        (["sweep", str(target), "--shard", "0/3"], "--shard"),
        (["sweep", str(target), "--cluster", "nowhere"], "--cluster"),
        (["sweep", str(target), "--cluster", "local:0"], "--cluster"),
        (["sweep", str(target), "--cluster", "local:2", "--shard", "1/2"], "cannot be combined"),
        (["sweep", str(target), "--out", str(target)], "not a directory"),
        # an out directory that cannot be created (works as root too, unlike permissions)
        (["sweep", str(target), "--out", str(target / "sub")], "cannot create"),
    ]
    for args, needle in cases:
        assert needle in _one_line_error(runner.invoke(app, args)), args


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only directories")
def test_unwritable_out_dir_is_one_line(tmp_path: Path) -> None:
    target = _target(tmp_path)
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o555)
    try:
        line = _one_line_error(runner.invoke(app, ["sweep", str(target), "--out", str(locked / "o")]))
        assert "locked" in line
    finally:
        locked.chmod(0o755)
