"""Detection events in and out through stim's own readers and writers, every format; bad files
are one line and exit 2."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import stim
from typer.testing import CliRunner

from planner.cli import app
from planner.devicedata import FORMATS, obs_path_for, read_events, write_events
from planner.errors import InputError
from tests.devicedata.hidden import write_target

runner = CliRunner()
D, O = 24, 1  # a d=3, 3-round rotated memory circuit: 24 detectors, 1 observable


def _data(shots: int = 128, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    return rng.random((shots, D)) < 0.1, rng.random((shots, O)) < 0.3


@pytest.mark.parametrize("fmt", FORMATS)
def test_round_trip_through_planner_and_stim(tmp_path: Path, fmt: str) -> None:
    det, obs = _data()
    path = tmp_path / f"events.{fmt}"
    write_events(path, det, obs, fmt=fmt)
    ev = read_events(path, num_detectors=D, fmt=fmt, num_observables=O)
    assert np.array_equal(ev.unpacked().astype(bool), det) and np.array_equal(ev.observables, obs)
    # stim's own reader agrees with what planner wrote, and planner reads what stim wrote
    assert np.array_equal(stim.read_shot_data_file(path=str(path), format=fmt, num_detectors=D), det)
    other = tmp_path / f"stim.{fmt}"
    stim.write_shot_data_file(data=det, path=str(other), format=fmt, num_detectors=D)
    assert np.array_equal(read_events(other, num_detectors=D, fmt=fmt).unpacked().astype(bool), det)


@pytest.mark.parametrize("fmt", FORMATS)
def test_planner_events_writes_what_calibrate_reads(tmp_path: Path, fmt: str) -> None:
    target = write_target(tmp_path)
    out = tmp_path / f"ev.{fmt}"
    result = runner.invoke(app, ["events", str(target), "-d", "3", "-r", "3", "--shots", "256", "--out", str(out),
                                 "--format", fmt, "--seed", "4"])
    assert result.exit_code == 0, result.stderr
    ev = read_events(out, num_detectors=D, fmt=fmt, num_observables=O)
    assert ev.num_shots == 256 and ev.observables is not None and obs_path_for(out).exists()
    assert 0 < ev.unpacked().mean() < 0.3  # detection events, not noise-free zeros nor garbage


def _bad_files(tmp: Path) -> dict[str, tuple[Path, str, str]]:
    """name -> (file, format to read it as, words the message must hold)."""
    det, _ = _data(shots=100)
    out: dict[str, tuple[Path, str, str]] = {}
    for fmt in ("b8", "01", "r8", "dets"):
        p = tmp / f"good.{fmt}"
        stim.write_shot_data_file(data=det, path=str(p), format=fmt, num_detectors=D)
        cut = tmp / f"cut.{fmt}"
        cut.write_bytes(p.read_bytes()[:-2])
        out[f"truncated {fmt}"] = (cut, fmt, "")
    wide = np.random.default_rng(1).random((100, 30)) < 0.2
    for fmt in ("b8", "01", "r8", "dets"):
        p = tmp / f"wide.{fmt}"
        stim.write_shot_data_file(data=wide, path=str(p), format=fmt, num_detectors=30)
        out[f"30 detectors as {fmt}"] = (p, fmt, "")
    out["b8 read as 01"] = (tmp / "good.b8", "01", "not 01 data")
    out["01 read as dets"] = (tmp / "good.01", "dets", "not dets data")
    (tmp / "empty.b8").write_bytes(b"")
    out["empty"] = (tmp / "empty.b8", "b8", "empty")
    out["missing"] = (tmp / "nothing.b8", "b8", "no such file")
    return out


def test_bad_files_raise_input_errors_naming_the_file(tmp_path: Path) -> None:
    for name, (path, fmt, words) in _bad_files(tmp_path).items():
        with pytest.raises(InputError) as exc:
            read_events(path, num_detectors=D, fmt=fmt)
        assert str(path) in str(exc.value) and words in str(exc.value), (name, str(exc.value))


@pytest.mark.parametrize("name", ["truncated b8", "30 detectors as dets", "b8 read as 01", "empty", "missing"])
def test_calibrate_refuses_a_bad_file_with_one_line(tmp_path: Path, name: str) -> None:
    path, fmt, _ = _bad_files(tmp_path)[name]
    target = write_target(tmp_path)
    out = tmp_path / "out"
    result = runner.invoke(app, ["calibrate", str(target), "--events", str(path), "-d", "3", "-r", "3",
                                 "--format", fmt, "--out", str(out), "--no-stages"])
    assert result.exit_code == 2, (name, result.stderr, result.stdout[-300:])
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error: ") and str(path) in lines[0], result.stderr
    assert "Traceback" not in result.stderr and not out.exists()


def test_a_bad_format_name_is_one_line(tmp_path: Path) -> None:
    target = write_target(tmp_path)
    result = runner.invoke(app, ["events", str(target), "-d", "3", "-r", "3", "--shots", "10",
                                 "--out", str(tmp_path / "x"), "--format", "csv"])
    assert result.exit_code == 2 and len(result.stderr.strip().splitlines()) == 1
    assert "b8" in result.stderr  # names what is allowed


def test_an_absurd_number_of_shots_is_refused_before_sampling(tmp_path) -> None:
    """10^12 shots of a d = 3 experiment would be terabytes: one line naming --shots, nothing written."""
    from typer.testing import CliRunner

    from planner.cli import app

    out = tmp_path / "e.b8"
    res = CliRunner().invoke(app, ["events", "targets/demo.toml", "--distance", "3", "--rounds", "3", "--basis", "z",
                                   "--shots", "1000000000000", "--out", str(out)])
    assert res.exit_code == 2 and res.stderr.count("\n") == 1
    assert res.stderr.startswith("planner: error: --shots:") and "GiB" in res.stderr
    assert not out.exists()
