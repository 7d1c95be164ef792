"""Planning for a spread of qubits: drawing device instances, the figures across them, the command."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.circuits import build_memory_circuit, qubit_layout
from planner.cli import app
from planner.config import EXAMPLE_TOML, parse_target
from planner.fits import Interval
from planner.jobs.spread import run_spread
from planner.noise import NoiseModel
from planner.planning.spread import draw_instances, percentile_interval
from planner.sweep import StoppingRule
from tests.helpers.targets import TINY_REPETITION

runner = CliRunner()
LAYOUT = qubit_layout(code="surface", distance=5)


def example(extra: str = "") -> str:
    return EXAMPLE_TOML.replace("[goal]", f"{extra}\n[goal]")


def circuit(model: NoiseModel, distance: int = 3) -> str:
    return str(build_memory_circuit(model, code="surface", distance=distance, rounds=2, basis="z"))


def test_a_zero_spread_gives_identical_instances() -> None:
    model = NoiseModel.from_target(parse_target(example('[device.qubits]\n"2,2" = { readout = 0.04 }')))
    chips = draw_instances(model, LAYOUT, draw="spread", count=3, seed=7, sigmas={"gate_2q": 0.0})
    texts = {circuit(c) for c in chips} | {circuit(c, 5) + "d5" for c in chips}
    assert len(texts) == 2  # one circuit per distance: every instance is the same chip...
    assert circuit(chips[0]) == circuit(model)  # ...and it is today's (its table included)


def test_the_same_seed_draws_the_same_chips() -> None:
    model = NoiseModel.from_target(parse_target(EXAMPLE_TOML))
    a = draw_instances(model, LAYOUT, draw="spread", count=2, seed=3, sigmas={"readout": 0.3})
    b = draw_instances(model, LAYOUT, draw="spread", count=2, seed=3, sigmas={"readout": 0.3})
    c = draw_instances(model, LAYOUT, draw="spread", count=2, seed=4, sigmas={"readout": 0.3})
    assert a == b and a != c and a[0] != a[1]


def test_a_lognormal_spread_keeps_the_median_and_has_its_sigma() -> None:
    model = NoiseModel.from_target(parse_target(EXAMPLE_TOML))
    chips = draw_instances(model, LAYOUT, draw="spread", count=20, seed=1, sigmas={"readout": 0.3, "gate_2q": 0.5})
    logs = np.log([c.qubit_value("readout", q.coords) / 0.01 for c in chips for q in LAYOUT.qubits])
    n = len(logs)  # 20 x 49 draws of a normal(0, 0.3): the mean within 4 standard errors of 0
    assert abs(logs.mean()) < 4 * 0.3 / math.sqrt(n)
    assert logs.std() == pytest.approx(0.3, rel=4 / math.sqrt(2 * n))  # sd of a sample sd: sigma/sqrt(2n)
    g2 = np.log([p.gate_2q / 0.005 for c in chips for p in c.pairs])
    assert g2.std() == pytest.approx(0.5, rel=4 / math.sqrt(2 * len(g2)))
    # values without a spread are untouched
    assert {c.qubit_value("reset", q.coords) for c in chips for q in LAYOUT.qubits} == {0.002}


def test_a_spread_never_makes_t2_exceed_twice_t1() -> None:
    model = NoiseModel.from_target(parse_target(EXAMPLE_TOML))  # T1 50 us, T2 40 us: close to the edge
    chips = draw_instances(model, LAYOUT, draw="spread", count=5, seed=2, sigmas={"t1_us": 1.0, "t2_us": 1.0})
    assert all(q.t2_us <= 2 * q.t1_us for c in chips for q in c.qubits)


def test_resampling_the_table_draws_rows_of_the_same_role() -> None:
    # a bad measure qubit and a bad data qubit; everything else at the component values
    text = example('[device.qubits]\n"2,2" = { readout = 0.04, t1_us = 20.0, t2_us = 30.0 }\n'
                   '"3,3" = { readout = 0.03 }\n[device.pairs]\n"2,2-3,3" = { gate_2q = 0.02 }')
    model = NoiseModel.from_target(parse_target(text))
    chips = draw_instances(model, LAYOUT, draw="table", count=30, seed=5)
    roles = {q.coords: q.role for q in LAYOUT.qubits}
    for chip in chips:
        for q in chip.qubits:
            row = (q.readout, q.t1_us, q.t2_us)
            assert row in {(0.04, 20.0, 30.0), (0.03, 50.0, 40.0), (0.01, 50.0, 40.0)}  # whole rows
            if row[0] == 0.04:
                assert roles[q.coords] != "data"
            if row[0] == 0.03:
                assert roles[q.coords] == "data"
        assert {p.gate_2q for p in chip.pairs} <= {0.02, 0.005}
    # 30 chips of 24 measure qubits: the bad one (1 in 24) is drawn about 30 times, never 0
    assert 5 < sum(q.readout == 0.04 for c in chips for q in c.qubits) < 80


def test_percentiles_and_their_intervals() -> None:
    rng = np.random.default_rng(0)
    values = [Interval(low=v * 0.95, best=v, high=v * 1.05) for v in np.linspace(1.0, 2.0, 21)]
    med = percentile_interval(values, q=50, rng=rng)
    p90 = percentile_interval(values, q=90, rng=rng)
    assert med.best == pytest.approx(1.5) and p90.best == pytest.approx(1.9)
    assert med.low < 1.5 < med.high and p90.low < 1.9 < p90.high and med.high < 2.0
    # wider per-instance intervals widen the percentile's interval
    loose = [Interval(low=iv.best / 2, best=iv.best, high=iv.best * 2) for iv in values]
    wide = percentile_interval(loose, q=50, rng=np.random.default_rng(0))
    assert wide.high - wide.low > med.high - med.low


def test_nothing_to_draw_from_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "plain.toml"
    path.write_text(EXAMPLE_TOML)
    result = runner.invoke(app, ["spread", str(path), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and len(result.stderr.strip().splitlines()) == 1
    assert "nothing to draw instances from" in result.stderr and "plain.toml" in result.stderr
    assert not (tmp_path / "out").exists()
    path.write_text(example("[device.spread]\ngate_2q = 0.3"))
    bad = runner.invoke(app, ["spread", str(path), "--instances", "0", "--out", str(tmp_path / "out")])
    assert bad.exit_code == 2 and "--instances" in bad.stderr and not (tmp_path / "out").exists()
    for draw, needle in (("table", "--draw table needs per-qubit"), ("best", "--draw: 'best'")):
        bad = runner.invoke(app, ["spread", str(path), "--draw", draw, "--out", str(tmp_path / "out")])
        assert bad.exit_code == 2 and len(bad.stderr.strip().splitlines()) == 1, bad.stderr
        assert needle in bad.stderr and not (tmp_path / "out").exists()


@pytest.mark.slow
def test_spread_command_end_to_end(tmp_path: Path) -> None:
    path = tmp_path / "tiny.toml"
    path.write_text(TINY_REPETITION.format(p=0.01).replace("[goal]", "[device.spread]\ngate_2q = 0.5\n[goal]"))
    out = tmp_path / "out"
    result = runner.invoke(app, ["spread", str(path), "--instances", "3", "--out", str(out), "--json",
                                 "--workers", "2", "--budget", "quick"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    assert doc["instances"] == 3 and doc["draw"] == "spread"
    eps = {row["d"]: row for row in doc["logical_error_per_cycle"]}
    assert set(eps) == {3, 5}
    for row in eps.values():
        for key in ("median", "p90"):
            iv = row[key]
            assert 0 < iv["low"] <= iv["best"] <= iv["high"] < 0.5
        assert row["median"]["best"] <= row["p90"]["best"]
    # below threshold the larger code is better (the SD6 repetition code's threshold is far above
    # 1%: common practice, no source); Lambda > 1 accordingly
    assert eps[5]["median"]["high"] < eps[3]["median"]["low"]
    assert doc["lambda"]["median"]["best"] > 1 and doc["lambda"]["p10"]["best"] <= doc["lambda"]["median"]["best"]
    assert len(doc["per_instance"]) == 3
    listed = {row["d"]: row["logical_error_per_cycle"] for row in doc["as_listed"]}
    assert set(listed) == {3, 5} and doc["lambda"]["as_listed"]["best"] > 1
    assert {p.name for p in out.iterdir()} >= {"spread.md", "spread.csv", "spread.json", "samples"}
    # run again: the same seed draws the same chips, whose samples are all there
    again = run_spread(parse_target(path.read_text(), source=str(path)), out_dir=out, instances=3,
                       rule=StoppingRule(max_errors=1_000, max_shots=1_000_000), workers=2)
    assert again.new_shots == 0


def test_a_bad_spread_names_its_key() -> None:
    with pytest.raises(ValueError, match="gate2q: unknown field; did you mean 'gate_2q'"):
        parse_target(example("[device.spread]\ngate2q = 0.3"), source="x.toml")
    with pytest.raises(ValueError, match="device.spread.readout"):
        parse_target(example("[device.spread]\nreadout = -0.1"), source="x.toml")
