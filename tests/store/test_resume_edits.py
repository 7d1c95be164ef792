"""Editing what does not decide the samples (goal, costs, roadmap) keeps the samples usable;
editing the device or the sweep is refused, never mixed."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app

pytestmark = pytest.mark.slow  # every test here samples with sinter

TINY = """
[device]
name = "tiny invented chip"
[device.preset]
model = "sd6"
p = {p}
[goal]
logical_error_per_cycle = {goal}
[sweep]
code = "repetition"
distances = [3, 5]
"""

runner = CliRunner()


def test_goal_edit_reuses_samples_device_edit_is_refused(tmp_path: Path) -> None:
    target, out = tmp_path / "tiny.toml", tmp_path / "out"
    target.write_text(TINY.format(p=0.03, goal=1e-6))
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1", "--quiet"])
    assert res.exit_code == 0, res.stderr
    before = json.loads(runner.invoke(app, ["status", str(out), "--json"]).stdout)["totals"]

    target.write_text(TINY.format(p=0.03, goal=1e-9))
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 0, res.stderr
    assert "nothing to sample" in res.stderr
    assert "1e-09" in (out / "target.toml").read_text()  # the query commands see the new goal
    after = json.loads(runner.invoke(app, ["status", str(out), "--json"]).stdout)["totals"]
    assert after == before

    target.write_text(TINY.format(p=0.031, goal=1e-9))
    res = runner.invoke(app, ["sweep", str(target), "--out", str(out), "--workers", "1"])
    assert res.exit_code == 2
    assert "the device changed: device.preset.p 0.03 vs 0.031" in res.stderr
