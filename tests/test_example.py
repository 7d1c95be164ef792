"""examples/plan_from_python.py runs as a user would run it and prints the headline answers,
each one consistent with itself (best inside its interval, qubits from the distance) and with the
files it says it wrote."""

from __future__ import annotations

import datetime as dt
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "plan_from_python.py"
NUM = r"([0-9.]+(?:e[-+]?\d+)?)"


@pytest.mark.slow
def test_the_example_prints_the_headline_answers(tmp_path: Path) -> None:
    done = subprocess.run([sys.executable, str(EXAMPLE), "--out", str(tmp_path), "--workers", "2"],
                          capture_output=True, text=True, timeout=600, cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    # d = 3, 5 x round counts d, 3d x 15 points x 2 bases
    assert lines[0].startswith("Marram-A (invented demo chip): 120 tasks, ")

    lam = re.fullmatch(rf"Lambda today: {NUM} \[{NUM}, {NUM}\] \(95% interval\)", lines[1])
    assert lam, lines[1]
    best, low, high = map(float, lam.groups())
    assert 1 < low <= best <= high  # the demo chip is below threshold: errors fall with distance

    goal = re.fullmatch(r"goal 1e-06 per cycle: distance (\d+), (\d+) physical qubits", lines[2])
    assert goal, lines[2]
    d, qubits = map(int, goal.groups())
    assert d % 2 == 1 and qubits == 2 * d * d - 1  # rotated surface code: d^2 data + d^2 - 1 measure

    joint = re.fullmatch(rf"joint factor: {NUM} \[{NUM}, {NUM}\] \(every error times this meets the goal\)",
                         lines[3])
    assert joint, lines[3]
    f, f_low, f_high = map(float, joint.groups())
    assert 0 < f_low <= f <= f_high

    met = re.fullmatch(r"goal met: (\S+) \[(\S+), (\S+)\] \((\d+)% of scenarios within the horizon\)", lines[4])
    assert met, lines[4]
    date, date_low, date_high = (dt.date.fromisoformat(x) for x in met.groups()[:3])
    assert dt.date(2027, 1, 1) <= date_low <= date <= date_high <= dt.date(2039, 1, 1)  # [roadmap] start + 12 y

    wrote = re.fullmatch(r"wrote (\d+) files under (.+) \(report.html has it all on one page\)", lines[5])
    assert wrote and Path(wrote[2]) == tmp_path / "out", lines[5]
    assert (tmp_path / "out" / "report.html").is_file() and (tmp_path / "out" / "requirements.csv").is_file()
    assert len(lines) == 6, lines
