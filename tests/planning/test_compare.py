"""Two devices side by side: `planner compare` on two small out directories (a revision with a
better two-qubit gate against the one before), and the pure comparison's arithmetic."""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.fits import Interval
from planner.planning.compare import ComparisonRow, compare_values
from tests.helpers.targets import TINY_REPETITION

runner = CliRunner()


def test_rows_say_whether_a_difference_goes_beyond_the_intervals() -> None:
    a = Interval(best=2.0, low=1.9, high=2.1)
    assert compare_values("x", a, Interval(best=2.05, low=1.95, high=2.15)).beyond_intervals is False
    row = compare_values("x", a, Interval(best=3.0, low=2.8, high=3.2))
    assert row.beyond_intervals is True and row.ratio == pytest.approx(1.5)
    bare = compare_values("x", Interval(best=2.0, low=2.0, high=2.0), Interval(best=3.0, low=3.0, high=3.0))
    assert bare.beyond_intervals is None and bare.verdict == "no interval"
    d = lambda y, m: dt.date(y, m, 1)  # noqa: E731
    dates = ComparisonRow(quantity="date: goal", kind="date", a_date=(d(2030, 1), d(2029, 6), d(2030, 6)),
                          b_date=(d(2029, 1), d(2028, 6), d(2029, 3)))
    assert dates.beyond_intervals is True and dates.change_months == pytest.approx(-12, abs=0.1)


def test_compare_two_out_directories(sample_once, tmp_path: Path) -> None:
    old = sample_once(TINY_REPETITION.format(p=0.03))
    new = sample_once(TINY_REPETITION.format(p=0.01))
    res = runner.invoke(app, ["compare", str(old.out), str(new.out), "--json", "--out", str(tmp_path / "cmp")])
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    rows = {r["quantity"]: r for r in doc["rows"]}
    fitted = rows["Lambda today, fitted"]
    # a lower physical error rate suppresses better: B's Lambda is larger, beyond the intervals
    assert fitted["ratio"] > 1 and fitted["beyond_intervals"] is True
    assert fitted["a"]["low"] <= fitted["a"]["best"] <= fitted["a"]["high"]
    for name in ("compare.md", "compare.csv", "compare.json"):
        assert (tmp_path / "cmp" / name).stat().st_size > 0
    csv_head = (tmp_path / "cmp" / "compare.csv").read_text().splitlines()[0]
    assert csv_head.startswith("quantity,a_best,a_low,a_high,b_best")
    text = runner.invoke(app, ["compare", str(old.out), str(new.out)])
    assert text.exit_code == 0 and "beyond" in text.stdout and "model-based" in text.stdout


def test_compare_refuses_the_same_directory_and_a_missing_one(tmp_path: Path) -> None:
    res = runner.invoke(app, ["compare", str(tmp_path), str(tmp_path)])
    assert res.exit_code == 2 and "same directory" in res.stderr and res.stderr.count("\n") == 1
    res = runner.invoke(app, ["compare", str(tmp_path / "nope"), str(tmp_path)])
    assert res.exit_code == 2 and "no such out directory" in res.stderr
