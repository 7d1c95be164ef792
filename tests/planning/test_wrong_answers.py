"""Issue 9, wrong answers: qubit counts per code, the qubit budget of ``ask --qubits``, headroom
without a fallback bound, what-if answers kept out of the review's files, overflow and underflow."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from planner.cli import app
from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.errors import InputError
from planner.planning import answer_all, build_roadmap, requirements
from planner.planning.ask import MAX_DISTANCE, choose_distance, goal_distance, required_suppression
from planner.planning.model import FitQuality, ResponseModel, largest_distance_within, physical_qubits
from tests.helpers.synthetic import synthetic_stats
from planner.reports import tables

runner = CliRunner()
SURFACE = parse_target(EXAMPLE_TOML)  # goal 1e-6 within 1000 qubits
ROADMAP = """
[roadmap]
start = 2030-01-01
horizon_years = 10
[roadmap.rates]
gate_2q = {per_year = 0.3}
"""
# a tiny repetition-code target (invented numbers): 41 qubits hold d = 21 (2*21-1), a surface code only d = 3
REPETITION = parse_target(EXAMPLE_TOML.replace("max_qubits = 1000", "max_qubits = 41")
                          .replace("[sweep]", '[sweep]\ncode = "repetition"\nbases = ["z"]') + ROADMAP)
W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}


def make_model(weights, *, ln_a=math.log(0.1)):
    q = FitQuality(None, 0.0, None, None, 0, "")
    return ResponseModel("linear", {c: weights.get(c, 0.0) for c in COMPONENTS}, {c: 0.0 for c in COMPONENTS},
                         {c: 0.0 for c in COMPONENTS}, ln_a, {c: 0.5 for c in COMPONENTS},
                         {c: 1.0 for c in COMPONENTS}, (), q)


def rendered(req) -> str:
    console = Console(width=120, record=True)
    tables.render_requirements(req, console)
    return console.export_text()


# ---- repetition code: 2d - 1 qubits


def test_qubits_per_code():
    # 2d-1: d data + d-1 measure qubits, common practice; 2d^2-1: Nature 638, 920 (2025)
    assert [physical_qubits(d, "repetition") for d in (3, 5, 21)] == [5, 9, 41]
    assert [physical_qubits(d) for d in (3, 5, 21)] == [17, 49, 881]
    assert largest_distance_within(41, "repetition") == 21 and largest_distance_within(40, "repetition") == 19
    assert largest_distance_within(41) == 3 and largest_distance_within(4, "repetition") is None


def test_repetition_target_goal_budget_and_today():
    m = make_model(W)  # 1/Lambda = 0.47: today d = 35 meets 1e-6 (0.1 * 0.47^18 = 1.3e-7; hand)
    r = requirements(m, REPETITION)
    assert (r.distance, r.physical_qubits, r.qubit_rule) == (21, 41, "2d-1")  # 2*21-1 = 41 qubits
    td = r.today
    assert td.distance is not None and td.physical_qubits == 2 * td.distance - 1
    assert td.within_max_qubits == (td.physical_qubits <= 41)
    assert r.to_json()["code"] == "repetition"
    r7 = requirements(m, REPETITION, qubits=13)  # 2*7-1 = 13
    assert (r7.distance, r7.physical_qubits) == (7, 13)
    with pytest.raises(InputError, match=r"qubits: 4 qubits is fewer than the 5 a distance-3 repetition"):
        choose_distance(REPETITION, qubits=4)


def test_repetition_roadmap_and_sensitivity_plan_for_its_own_goal_distance():
    assert goal_distance(REPETITION) == 21 and goal_distance(SURFACE) == 21
    rm = build_roadmap(REPETITION, make_model(W))
    assert rm.goal_distance == 21
    assert all(s.physical_qubits == 2 * s.distance - 1 for s in rm.steps if s.distance)


# ---- the budget of --qubits in the "Today" line


def test_today_line_uses_the_qubits_budget():
    m = make_model(W)  # today needs d = 35 (hand: 0.1 * 0.47^18 <= 1e-6 < 0.1 * 0.47^17): 2449 qubits
    r = requirements(m, SURFACE, qubits=100)
    assert r.today.max_qubits == 100 and not r.today.within_max_qubits
    assert "more than --qubits = 100" in r.today.note
    out = rendered(r)
    assert "over the budget of 100" in out and "1000" not in out.split("Today:")[1]
    assert requirements(m, SURFACE).today.max_qubits == 1000  # without --qubits: goal.max_qubits


# ---- headroom: no fallback value printed as a bound


def test_unbounded_headroom_has_no_factor():
    m = make_model({"gate_2q": 0.05, "readout": 0.05})  # Lambda 10, gate_1q weight 0
    r = requirements(m, SURFACE, eps_target=1e-3, distance=7)
    g1 = next(a for a in r.components if a.lever == "gate_1q")
    assert g1.reachable and g1.factor is None and "more than x1024" in g1.note
    j = r.joint  # finite headroom: 0.1 * (0.1 f)^4 = 1e-3 -> f = 10^(1/2) (hand)
    assert j.factor == pytest.approx(10**0.5, rel=1e-9)


def test_headroom_intervals_hold_no_fallback_value():
    target = parse_target(EXAMPLE_TOML.replace("1e-6", "1e-3"))  # met today at d = 21
    stats = synthetic_stats(weights={**W, "gate_1q": 0.0}, prefactor=0.1, distances=(3, 5, 7),
                            joint_scales=(0.5, 0.7, 1.0), component_scales=(0.3, 0.6), seed=3)
    r = answer_all(target, stats, seed=5, replicas=60).requirements
    g1 = next(a for a in r.components if a.lever == "gate_1q")
    assert g1.factor is None and g1.factor_interval is None  # was "1 [1, 526]"
    # Lambda reached by an unchanged lever is today's Lambda, with today's interval
    assert g1.suppression_interval is not None
    assert g1.suppression_interval.low > 0.9 * r.today.suppression_model
    for a in (r.joint, *r.components):
        if a.factor_interval is not None:
            assert a.factor_interval.low != 1.0 and a.factor_interval.low <= a.factor <= a.factor_interval.high
    assert "1 [1," not in rendered(r)


# ---- what-if answers never replace the review's files


@pytest.fixture()
def fake_out_dir(tmp_path, monkeypatch):
    """An out directory whose samples are synthetic (no sampling): load_out_dir is replaced."""
    target = parse_target(EXAMPLE_TOML.replace("1e-6", "1e-4").replace("max_qubits = 1000", "max_qubits = 200"))
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(0.5, 1.0),
                            component_scales=(0.5,), components=("gate_2q", "readout"), bases=("z",), seed=1)
    import planner.jobs.review

    monkeypatch.setattr(planner.jobs.review, "load_out_dir", lambda directory: (target, stats))
    out = tmp_path / "out"
    out.mkdir()
    return out  # goal distance 9: 2*9^2-1 = 161 <= 200


def test_ask_repetition_out_dir_counts_2d_minus_1(tmp_path, monkeypatch):
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5), joint_scales=(0.5, 1.0), bases=("z",),
                            seed=2)
    import planner.jobs.review

    monkeypatch.setattr(planner.jobs.review, "load_out_dir", lambda directory: (REPETITION, stats))
    doc = json.loads(runner.invoke(app, ["ask", str(tmp_path), "--json"]).stdout)
    assert (doc["distance"], doc["physical_qubits"], doc["qubit_rule"]) == (21, 41, "2d-1")
    today = doc["today"]
    assert today["physical_qubits"] == 2 * today["distance"] - 1
    res = runner.invoke(app, ["ask", str(tmp_path), "--qubits", "13"])
    assert res.exit_code == 0 and "d = 7 (13 qubits" in res.stdout, res.output  # 2*7-1 = 13
    assert "2d-1" in (tmp_path / "requirements.md").read_text()


def test_what_if_prints_and_keeps_the_review(fake_out_dir: Path):
    review = fake_out_dir / "requirements.md"
    res = runner.invoke(app, ["ask", str(fake_out_dir)])  # the review's own question: written
    assert res.exit_code == 0, res.output
    before = review.read_text()
    assert "at distance 9" in before
    for args in (["--distance", "15"], ["--qubits", "100"], ["--target", "1e-9"]):
        res = runner.invoke(app, ["ask", str(fake_out_dir), *args])
        assert res.exit_code == 0, (args, res.output)
        assert res.stdout.startswith("What-if:") and "--save" in res.stderr
        assert review.read_text() == before, args
    assert sorted(p.name for p in fake_out_dir.iterdir()) == ["requirements.csv", "requirements.md"]
    doc = json.loads(runner.invoke(app, ["ask", str(fake_out_dir), "--distance", "15", "--json"]).stdout)
    assert doc["what_if"] is True and doc["distance"] == 15
    # the goal's own distance is no what-if: the review's file is rewritten, and identical
    doc = json.loads(runner.invoke(app, ["ask", str(fake_out_dir), "--distance", "9", "--json"]).stdout)
    assert doc["what_if"] is False and review.read_text() == before


def test_what_if_saved_only_where_asked(fake_out_dir: Path):
    res = runner.invoke(app, ["ask", str(fake_out_dir), "--distance", "15", "--save",
                              str(fake_out_dir / "whatif-d15.md")])
    assert res.exit_code == 0, res.output
    saved = (fake_out_dir / "whatif-d15.md").read_text()
    assert "What-if: --distance 15" in saved and "at distance 15" in saved
    assert (fake_out_dir / "whatif-d15.csv").is_file() and not (fake_out_dir / "requirements.md").exists()
    for bad in ("requirements.md", "report.md", "whatif-d15.txt"):
        res = runner.invoke(app, ["ask", str(fake_out_dir), "--distance", "15", "--save", str(fake_out_dir / bad)])
        assert res.exit_code == 2 and res.stdout == "", bad
        assert res.stderr.startswith("planner: error: --save:") and len(res.stderr.splitlines()) == 1, bad
    assert not (fake_out_dir / "requirements.md").exists()


# ---- overflow and underflow: refuse, or say "beyond", never inf or a zero interval


@pytest.mark.parametrize("args, option", [
    (["--lambda", "1e300", "--eps", "1e-3", "--distance", "999", "--target", "1e-6"], "--lambda"),
    (["--lambda", "2", "--eps", "1e-3", "--distance", "1000000000000000001", "--target", "1e-6"], "--distance"),
    (["--lambda", "2", "--eps", "1e-3", "--distance", "1003", "--target", "1e-6"], "--distance"),
    (["--lambda", "0", "--eps", "1e-3", "--distance", "5", "--target", "1e-6"], "--lambda"),
    (["--lambda", "nan", "--eps", "1e-3", "--distance", "5", "--target", "1e-6"], "--lambda"),
    (["--lambda", "2", "--eps", "0.5", "--distance", "5", "--target", "1e-6"], "--eps"),
    (["--lambda", "2", "--eps", "0", "--distance", "5", "--target", "1e-6"], "--eps"),
    (["--lambda", "2", "--eps", "nan", "--distance", "5", "--target", "1e-6"], "--eps"),
    (["--lambda", "2", "--eps", "1e-3", "--distance", "5", "--target", "1e-320"], "--target"),
    # 1e-3 at d = 1001 with Lambda 5 means A = 10^347: numbers that do not belong together
    (["--lambda", "5", "--eps", "1e-3", "--distance", "1001", "--target", "1e-6"], "--eps"),
])
def test_calculator_out_of_range_is_one_line_exit_2(args, option):
    res = runner.invoke(app, ["ask", *args])
    assert res.exit_code == 2 and res.stdout == "", (args, res.output)
    line = res.stderr.strip()
    assert len(line.splitlines()) == 1 and line.startswith(f"planner: error: {option}:"), line
    assert "allowed" in line


def test_calculator_never_prints_inf():
    args = ["ask", "--lambda", "1000", "--eps", "1e-3", "--distance", "199", "--target", "1e-20"]
    res = runner.invoke(app, args)  # (A / eps)^(1/k) overflowed to inf before: A / eps = 1e317
    assert res.exit_code == 0 and "inf" not in res.stdout, res.output
    doc = json.loads(runner.invoke(app, [*args, "--json"]).stdout)
    # required Lambda = Lambda * (eps / target)^(1/k), k = 100 (hand arithmetic)
    assert doc["required_lambda"] == pytest.approx(1000 * 1e17 ** 0.01)
    # 17 decades below eps: ceil(17 / 3) = 6 factors of Lambda, d = 199 + 12 = 211, 2*211^2-1 qubits
    assert doc["distance"] == 211 and doc["physical_qubits"] == 89041


def test_calculator_beyond_the_largest_distance_says_so():
    res = runner.invoke(app, ["ask", "--lambda", "1.0000001", "--eps", "1e-3", "--distance", "3",
                              "--target", "1e-12", "--json"])
    doc = json.loads(res.stdout)
    assert doc["reachable"] is False and f"beyond {MAX_DISTANCE}" in doc["note"]


def test_distances_and_budgets_beyond_the_limit():
    m = make_model(W)
    with pytest.raises(InputError, match=r"distance: 1000000000000000000 is not allowed: .*3 <= d <= 1001"):
        requirements(m, SURFACE, distance=10**18)
    r = requirements(m, SURFACE, qubits=10**18)  # answered at the largest distance, and said so
    assert r.distance == MAX_DISTANCE and "capped" in r.distance_source
    with pytest.raises(InputError, match="target"):
        requirements(m, SURFACE, eps_target=1e-320)


def test_underflowing_eps_is_not_printed_as_zero():
    m = make_model({"gate_2q": 0.01})  # Lambda 100: eps at d = 1001 is 0.1 * 0.01^501, below any float
    r = requirements(m, SURFACE, distance=1001)
    assert r.today.logical_error_per_cycle is None and any("below 1e-300" in n for n in r.notes)
    out = rendered(r)
    assert "below 1e-300: beyond any reachable" in out
    assert "inf" not in out and not any(line.endswith(": 0.") for line in out.splitlines())


def test_required_lambda_beyond_any_float_is_none():
    m = make_model(W, ln_a=1500.0)  # absurd prefactor: Lambda needed e^(756) at d = 3
    assert required_suppression(m, distance=3, eps_target=1e-6) is None
    r = requirements(m, SURFACE, distance=3)
    assert r.required_suppression is None and any("beyond any reachable" in n for n in r.notes)
    assert "inf" not in rendered(r)
