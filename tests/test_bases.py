"""X and Z bases: each basis's per-cycle rate shown with its interval, and ``[goal] basis``
choosing what the goal (and so Lambda and every answer) refers to: the mean of the bases or the
worse one. Synthetic counts of known truth (no sampling): the Z basis has a known rate, the X
basis 1.6x it, both with a boundary offset C != 1 over r = d and r = 3d."""

from __future__ import annotations

import hashlib
import json
import re

import numpy as np
import pytest
import sinter
from rich.console import Console
from typer.testing import CliRunner

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.fits import fit_stats
from planner.planning import answer_all
from planner.reports.csvtables import fits_distance_csv
from planner.reports.tables import render_fits

#: 1/Lambda = sum_c w_c s_c (per basis a factor on the prefactor); invented numbers
WEIGHTS = {"gate_2q": 0.25, "readout": 0.1, "idle": 0.1}
PREFACTOR = 0.08
X_OVER_Z = 1.6
OFFSET = {"z": 0.96, "x": 0.985}


def eps_of(basis: str, scale: float, d: int) -> float:
    inv = sum(WEIGHTS.values()) * scale
    return PREFACTOR * (X_OVER_Z if basis == "x" else 1.0) * inv ** ((d + 1) / 2)


def stats_of(*, seed: int = 0, shots: int = 400_000) -> list[sinter.TaskStats]:
    rng = np.random.default_rng(seed)
    out = []
    for f in (0.5, 0.7, 1.0):
        scales = {c: f for c in COMPONENTS}
        for d in (3, 5, 7):
            for r in (d, 3 * d):
                for b in ("z", "x"):
                    p = (1 - OFFSET[b] * (1 - 2 * eps_of(b, f, d)) ** r) / 2
                    meta = {"code": "surface", "d": d, "basis": b, "rounds": r, "axis": "joint", "factor": f,
                            "scales": scales}
                    sid = hashlib.sha256(json.dumps(meta, sort_keys=True).encode()).hexdigest()
                    out.append(sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=meta,
                                                shots=shots, errors=int(rng.binomial(shots, p))))
    return out


@pytest.fixture(scope="module")
def stats() -> list[sinter.TaskStats]:
    return stats_of()


def test_each_basis_rate_is_shown_with_an_interval_holding_the_truth(stats):
    report = fit_stats(stats)
    held = total = 0
    for p in report.distances:
        assert p.method == "decay" and p.rounds == (p.distance, 3 * p.distance)
        for b in ("z", "x"):
            f = p.basis_fit(b)
            total += 1
            held += f.per_cycle.low <= eps_of(b, p.factor, p.distance) <= f.per_cycle.high
            assert f.offset is not None
        assert p.basis_fit("x").per_cycle.best > p.basis_fit("z").per_cycle.best
    assert held >= total - 1  # 18 intervals at 95%: at most one miss (fixed seed)


def test_mean_and_worse_combine_the_bases_and_move_lambda(stats):
    mean, worse = fit_stats(stats), fit_stats(stats, goal_basis="worse")
    for pm, pw in zip(mean.distances, worse.distances):
        x, z = pm.basis_fit("x").per_cycle, pm.basis_fit("z").per_cycle
        assert pm.per_cycle.best == pytest.approx((x.best + z.best) / 2)
        assert pw.per_cycle == x and pw.combine == "worse" and pm.combine == "mean"
        # the single-round (r = d) estimates are combined the same way (here Z's larger boundary
        # offset makes its r = d rate the larger one at some distances)
        singles = [pw.basis_fit(b).single_round for b in ("x", "z")]
        assert pw.per_cycle_single_round == max(singles, key=lambda iv: iv.best)
    # the truth: Lambda = 1 / (sum w * s) in both bases; the prefactor differs by X_OVER_Z
    for lf in worse.lambdas:
        true_lambda = 1 / (sum(WEIGHTS.values()) * lf.factor)
        assert lf.suppression.low <= true_lambda <= lf.suppression.high
        true_ln_a = np.log(PREFACTOR * X_OVER_Z)
        assert lf.ln_prefactor.low <= true_ln_a <= lf.ln_prefactor.high
    assert worse.today().ln_prefactor.best > mean.today().ln_prefactor.best


def test_json_states_the_goal_basis_and_holds_per_basis_rates(stats):
    doc = fit_stats(stats, goal_basis="worse").to_json()
    assert doc["goal_basis"] == "worse" and doc["per_cycle_method"] == "decay"
    row = doc["per_distance"][0]
    assert row["combine"] == "worse" and set(row["per_basis"]) == {"x", "z"}
    for b in ("x", "z"):
        basis = row["per_basis"][b]
        assert basis["method"] == "decay"
        assert {"best", "low", "high"} <= set(basis["logical_error_per_cycle"])
        assert basis["boundary_offset"]["low"] < basis["boundary_offset"]["high"]
        assert basis["per_cycle_single_round"]["best"] > 0
    assert row["per_cycle_single_round"]["best"] > 0


def test_fit_table_shows_each_basis_and_says_what_the_goal_refers_to(stats):
    for how in ("mean", "worse"):
        con = Console(record=True, width=240)
        render_fits(fit_stats(stats, goal_basis=how), con)
        text = con.export_text()
        for basis in ("x", "z", how):  # a row per basis and one for the goal's combination
            assert re.search(rf"^joint\s+1\s+7\s+{basis}\s+\d", text, re.M), basis
        assert f"the '{how}' row is what the goal and Lambda use" in text and f'goal.basis = "{how}"' in text
    csv = fits_distance_csv(fit_stats(stats, goal_basis="worse"))
    assert {"eps_x", "eps_z_low", "offset_x_high", "goal_basis", "eps_single_round"} <= set(csv.headers)
    assert len(csv.rows) == 9 and all(r[csv.headers.index("goal_basis")] == "worse" for r in csv.rows)


def test_goal_basis_worse_propagates_into_the_answers(stats):
    targets = {how: parse_target(EXAMPLE_TOML.replace("max_qubits = 1000", f"max_qubits = 1000\nbasis = \"{how}\""),
                                 source="example.toml") for how in ("mean", "worse")}
    assert targets["mean"].goal.basis == "mean" and targets["worse"].goal.basis == "worse"
    answers = {how: answer_all(t, stats, replicas=20) for how, t in targets.items()}
    assert answers["worse"].fits.goal_basis == "worse" and answers["mean"].fits.goal_basis == "mean"
    assert answers["worse"].to_json()["fits"]["goal_basis"] == "worse"
    # the worse basis needs more: a smaller joint factor (or a larger distance) for the same goal
    jw, jm = answers["worse"].requirements.joint, answers["mean"].requirements.joint
    assert jw.factor < jm.factor
    assert jw.factor_interval is not None and jw.factor_interval.low <= jw.factor <= jw.factor_interval.high


def test_default_goal_basis_is_the_mean_and_a_bad_one_exits_2(tmp_path):
    from planner.cli import app

    assert parse_target(EXAMPLE_TOML, source="example.toml").goal.basis == "mean"
    path = tmp_path / "t.toml"
    path.write_text(EXAMPLE_TOML.replace("max_qubits = 1000", "max_qubits = 1000\nbasis = \"max\""))
    result = CliRunner().invoke(app, ["circuit", str(path), "--distance", "3"])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error:") and "goal.basis" in lines[0]
    assert "'mean'" in lines[0] and "'worse'" in lines[0]
