"""`verify` beyond the fit: the distances it samples, the CPU estimate and the --max-cpu refusal
or skip, the flag and widening factor when a prediction misses, and the files it writes.

The planning parts run on synthetic counts (tests.helpers.synthetic: binomial draws from a known
model) in seconds; the command runs once on the tiny repetition target (tests.helpers.targets)
with the 'quick' budget shrunk to a few errors per task, so it samples in seconds too.
"""

from __future__ import annotations

import csv
import io
import json
import math

import pytest
import sinter
from typer.testing import CliRunner

from planner.cli import app
from planner.config import EXAMPLE_TOML, parse_target
from planner.fits import Interval
from planner.planning import answer_all
from planner.planning.verify import (
    CpuEstimate,
    Verification,
    VerifyRow,
    compare,
    goal_to_verify,
    operating_points,
    task_shots,
    verify_distances,
    verify_rounds,
    widen_factor,
)
from planner.reports import files, plots
from planner.sweep import StoppingRule
from tests.helpers.sampled import SampleOnce, copy_out
from tests.helpers.synthetic import shot_rate, synthetic_stats
from tests.helpers.targets import TINY_REPETITION

W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
runner = CliRunner()


@pytest.fixture(scope="module")
def target():
    return parse_target(EXAMPLE_TOML)


@pytest.fixture(scope="module")
def answers(target):
    sw = target.sweep
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=sw.distances, joint_scales=sw.joint_scales,
                            shots=200_000, seed=3)
    return answer_all(target, stats, replicas=20, seed=3)


def beyond_stats(answers, points, distances, *, bias: float = 1.0, shots: int = 20_000_000):
    """Counts at r = d and 3d whose per-cycle rate is the model's prediction times ``bias``."""
    import numpy as np

    rng = np.random.default_rng(7)
    out = []
    for p in points:
        for d in distances:
            eps = bias * answers.model.logical_error_per_cycle(p.scales, d)
            for r in verify_rounds(d):
                meta = {"code": "surface", "d": d, "basis": "z", "rounds": r, "axis": p.label,
                        "factor": p.factor, "scales": p.scales}
                out.append(sinter.TaskStats(strong_id=f"{p.label}-{d}-{r}", decoder="pymatching", json_metadata=meta,
                                            shots=shots, errors=int(rng.binomial(shots, shot_rate(eps, r)))))
    return out


# ---------------------------------------------------------------------------------------------
# where verify samples


def test_distances_are_above_the_fit_not_capped():
    assert verify_distances([3, 5, 7]) == (9, 11)  # was (5, 7): the two largest sampled, capped at 7
    assert verify_distances([3, 5, 7, 9, 11]) == (13, 15)
    assert goal_to_verify([3, 5, 7], 21) == 21 and goal_to_verify([3, 5, 7], 11) is None
    assert verify_rounds(11) == (11, 33)


def test_shots_to_the_stopping_rule():
    # 100 errors at P = (1 - (1 - 2e-6)^21) / 2 ~ 2.1e-5 per shot: about 4.76M shots
    assert task_shots(eps=1e-6, rounds=21, max_errors=100, max_shots=10**9) == pytest.approx(100 / 2.1e-5, rel=1e-3)
    assert task_shots(eps=1e-6, rounds=21, max_errors=100, max_shots=1000) == 1000
    assert task_shots(eps=0.0, rounds=5, max_errors=10, max_shots=77) == 77


def test_widen_factor_is_the_log_half_width_ratio():
    p = Interval(low=0.5, best=1.0, high=2.0)
    assert widen_factor(p, Interval(low=0.9, best=1.9, high=2.1)) == 1.0
    assert widen_factor(p, Interval(low=7.0, best=8.0, high=9.0)) == pytest.approx(3.0)  # ln 8 / ln 2
    assert widen_factor(p, Interval(low=0.1, best=0.125, high=0.2)) == pytest.approx(3.0)
    assert math.isinf(widen_factor(Interval(low=1.0, best=1.0, high=1.0), Interval(low=2, best=3.0, high=4)))
    zero = VerifyRow(label="p", quantity="logical_error_per_cycle", distance=9, predicted=p,
                     sampled=Interval(low=0.0, best=5.0, high=5.0), zero_errors=True)
    assert zero.covered is None and zero.widen is None  # a bound is not judged


# ---------------------------------------------------------------------------------------------
# the flag


def test_a_prediction_that_holds_is_not_flagged(answers):
    points = operating_points(answers)
    distances = verify_distances(answers.fits.sampled_distances)
    v = compare(answers, points, distances, beyond_stats(answers, points, distances))
    eps_rows = [r for r in v.rows if r.quantity == "logical_error_per_cycle"]
    assert eps_rows and all(r.sampled is not None for r in eps_rows)
    assert {r.distance for r in eps_rows} == {7, 9}  # EXAMPLE_TOML fits d = 3, 5
    assert not v.flagged and v.widen_factor == 1.0, [(r.predicted, r.sampled) for r in eps_rows]
    assert v.fitted_max == 5 and v.goal_distance == answers.requirements.distance


def test_a_prediction_that_misses_flags_and_says_how_much_to_widen(answers):
    points = operating_points(answers)
    distances = verify_distances(answers.fits.sampled_distances)
    v = compare(answers, points, distances, beyond_stats(answers, points, distances, bias=3.0))
    assert v.flagged and v.widen_factor > 1.0
    worst = max(r.widen for r in v.rows if r.widen is not None)
    assert v.widen_factor == worst
    # widened by that factor, every predicted interval holds its sampled best
    for r in v.rows:
        if r.quantity == "logical_error_per_cycle" and r.sampled is not None:
            b = r.predicted.best
            hi = b * (r.predicted.high / b) ** v.widen_factor
            assert r.sampled.best <= hi * (1 + 1e-9)
    doc = v.to_json()
    assert doc["flagged"] is True and doc["widen_factor"] == pytest.approx(v.widen_factor)
    assert Verification.from_json(json.loads(json.dumps(doc))).to_json() == doc


# ---------------------------------------------------------------------------------------------
# files


def test_verify_files_and_report_section(tmp_path, monkeypatch, target, answers):
    points = operating_points(answers)
    distances = verify_distances(answers.fits.sampled_distances)
    cpu = [CpuEstimate(distance=d, tasks=4, shots=10**6, seconds=12.0, seconds_per_detector=1.5e-8, sampled=True)
           for d in distances]
    cpu.append(CpuEstimate(distance=21, tasks=4, shots=10**8, seconds=9e5, seconds_per_detector=2e-8,
                           sampled=False, why="over the 28800 s --max-cpu leaves"))
    v = compare(answers, points, distances, beyond_stats(answers, points, distances, bias=3.0), cpu=cpu)
    written = sorted(p.name for p in files.write_verification(v, tmp_path))
    assert written == ["verify.csv", "verify.json", "verify.md"]
    md = (tmp_path / "verify.md").read_text()
    assert "FLAGGED" in md and "beyond fit" in md and "CPU estimates made before sampling" in md
    assert "d=21 not sampled" in md
    rows = list(csv.DictReader(io.StringIO((tmp_path / "verify.csv").read_text())))
    assert {"covered", "widen"} <= set(rows[0]) and any(r["covered"] == "false" for r in rows)
    doc = json.loads((tmp_path / "verify.json").read_text())
    assert doc["flagged"] is True and doc["goal_distance"] == answers.requirements.distance
    assert [c["distance"] for c in doc["cpu_estimates"]] == [*distances, 21]
    assert files.read_verification(tmp_path).to_json() == v.to_json()
    monkeypatch.setattr(plots, "render_all", lambda answers, *, target: {})
    files.write_all(answers, out_dir=tmp_path, target=target, verification=v)
    page = (tmp_path / "report.html").read_text()
    assert "Verification beyond the fit" in page and "FLAGGED" in page and "CPU estimates" in page


# ---------------------------------------------------------------------------------------------
# the command: estimate printed, refusal, skip


@pytest.fixture(scope="module")
def tiny_out(tmp_path_factory, sample_once: SampleOnce):
    root = tmp_path_factory.mktemp("verify_beyond")
    # repetition code (2d - 1 qubits): max_qubits 39 puts the goal at d = 19
    toml = TINY_REPETITION.format(p=0.02).replace("[goal]", "[goal]\nmax_qubits = 39")
    return copy_out(sample_once(toml, workers=2), root / "out")


@pytest.fixture
def small_budget(monkeypatch):
    """The 'quick' budget shrunk so verify samples in seconds (the stopping rule, not the logic, is cut)."""
    import planner.sweep

    monkeypatch.setitem(planner.sweep.BUDGETS, "quick", StoppingRule(max_errors=20, max_shots=20_000))


def test_cli_refuses_when_the_distances_above_the_fit_exceed_max_cpu(tiny_out, small_budget):
    res = runner.invoke(app, ["verify", str(tiny_out), "--max-cpu", "1e-9", "--workers", "1"])
    assert res.exit_code == 2, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error: --max-cpu:"), res.stderr
    assert "d=7, 9" in lines[0] and "estimated" in lines[0]
    assert not (tiny_out / "verify" / "samples").exists() or not any((tiny_out / "verify" / "samples").iterdir())


def test_cli_prints_the_estimate_and_skips_the_goal_over_max_cpu(tiny_out, small_budget):
    # the goal (d = 19, eps 1e-6) needs about 1e9 shots per task at its predicted rate: far over 60 s
    res = runner.invoke(app, ["verify", str(tiny_out), "--max-cpu", "60", "--workers", "1"])
    assert res.exit_code == 0, res.output
    assert "CPU estimate before sampling" in res.stderr
    assert res.stderr.index("CPU estimate before sampling") < res.stderr.index("sampling ")  # before it samples
    doc = json.loads((tiny_out / "verify.json").read_text())
    assert doc["distances"] == [7, 9]  # the tiny sweep fitted d = 3, 5
    goal = doc["cpu_estimates"][-1]
    assert goal["distance"] == doc["goal_distance"] == 19 and goal["sampled"] is False
    assert "--max-cpu" in goal["why"] and goal["seconds"] > 60
    assert f"d={goal['distance']} not sampled" in doc["note"]
    assert all(c["sampled"] for c in doc["cpu_estimates"][:-1])
    assert "d=19 not sampled" in res.stdout.replace("\n", " ")
    assert "Verdict:" in res.stdout
