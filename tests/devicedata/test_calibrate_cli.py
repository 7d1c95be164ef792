"""`planner events` -> `planner calibrate` end to end on the command line: the JSON contract,
the files written, the staged comparison and the logical-rate check."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.config import load_target
from tests.devicedata.hidden import write_target

runner = CliRunner()


def _events(tmp: Path, *, shots: int = 100_000, inject: str | None = "3,3=0.01") -> Path:
    """Events from the test chip with one bad qubit played by `planner events --inject`."""
    out = tmp / "ev.r8"
    args = ["events", str(write_target(tmp)), "-d", "3", "-r", "3", "--shots", str(shots), "--out", str(out),
            "--format", "r8", "--seed", "9"]
    result = runner.invoke(app, args + (["--inject", inject] if inject else []))
    assert result.exit_code == 0, result.stderr
    return out


def test_calibrate_json_contract_and_files(tmp_path: Path) -> None:
    events = _events(tmp_path)
    out = tmp_path / "cal"
    result = runner.invoke(app, ["calibrate", str(tmp_path / "chip.toml"), "--events", str(events), "-d", "3",
                                 "-r", "3", "--format", "r8", "--out", str(out), "--no-stages", "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)  # one JSON object and nothing else on stdout
    for name in ("gate_1q", "gate_2q", "readout", "idle_measure"):
        c = doc["components"][name]
        assert c["low"] <= c["best"] <= c["high"], (name, c)
    assert doc["outliers"][0]["qubit"] == [3.0, 3.0] and doc["outliers"][0]["sigma"] >= 5
    assert {"calibrated.toml", "calibrate.md", "calibrate.json", "calibrate_stabilizers.csv"} <= {
        p.name for p in out.iterdir()}
    assert {p.name for p in (out / "plots").iterdir()} == {
        "calibrate_rounds.png", "calibrate_map.png", "calibrate_pairs.png", "calibrate_stages.png"}
    load_target(out / "calibrated.toml")


def test_bad_fit_component_and_logical_csv_are_one_line(tmp_path: Path) -> None:
    events = _events(tmp_path, shots=2000, inject=None)
    base = ["calibrate", str(tmp_path / "chip.toml"), "--events", str(events), "-d", "3", "-r", "3",
            "--format", "r8", "--out", str(tmp_path / "o"), "--no-stages"]
    bad_csv = tmp_path / "logical.csv"
    bad_csv.write_text("distance,shots\n3,100\n")
    for extra, needle in ((["--fit", "gate_3q"], "gate_3q"), (["--logical", str(bad_csv)], "errors"),
                          (["--threshold", "0"], "threshold"),
                          (["-d", "5"], "not r8 data")):
        result = runner.invoke(app, base + extra)
        assert result.exit_code == 2, (extra, result.stderr)
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and needle in lines[0], (extra, result.stderr)


@pytest.mark.slow
def test_staged_comparison_and_logical_check(tmp_path: Path) -> None:
    events = _events(tmp_path, shots=50_000)
    csv = tmp_path / "logical.csv"
    # one point as the calibrated model predicts it, one ten times worse (a surprising result)
    csv.write_text("label,distance,rounds,shots,errors\nplain,3,3,20000,0\nsurprise,3,3,2000,1500\n")
    out = tmp_path / "cal"
    result = runner.invoke(app, ["calibrate", str(tmp_path / "chip.toml"), "--events", str(events), "-d", "3",
                                 "-r", "3", "--format", "r8", "--out", str(out), "--logical", str(csv),
                                 "--workers", "1", "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    stages = doc["stages"]
    assert stages[0]["name"] == "first principles" and stages[-1]["name"].startswith("+ outlier qubits 3,3")
    first, last = stages[0]["logical_error_per_cycle"], stages[-1]["logical_error_per_cycle"]
    measured = doc["measured_logical_error_per_cycle"]
    # the first-principles model under-predicts; the last stage agrees with the data within intervals
    assert first["high"] < measured["low"]
    assert last["low"] <= measured["high"] and measured["low"] <= last["high"], (last, measured)
    flagged = {c["label"] for c in doc["logical_checks"] if c["flagged"]}
    assert "surprise" in flagged
    assert all(o["qubit"] is not None and "sigma" in o for o in doc["outliers"])


@pytest.mark.parametrize(("code", "basis", "inject", "bad"), [("repetition", "z", None, None),
                                                                ("surface", "x", "2,2=0.01", [2.0, 2.0])])
def test_other_codes_and_bases(tmp_path: Path, code: str, basis: str, inject: str | None,
                               bad: list[float] | None) -> None:
    """The repetition code (no QUBIT_COORDS: qubit q sits at q,0) and the X basis (a bad measure
    qubit): a device that is exactly the model has every fitted excess's interval at zero."""
    from tests.devicedata.hidden import TARGET_TOML

    target = tmp_path / "t.toml"
    target.write_text(TARGET_TOML.replace("[sweep]\n", f'[sweep]\ncode = "{code}"\n'))
    events = tmp_path / "ev.01"
    args = ["events", str(target), "-d", "3", "-r", "3", "--basis", basis, "--shots", "50000", "--out", str(events),
            "--format", "01", "--seed", "3"]
    assert runner.invoke(app, args + (["--inject", inject] if inject else [])).exit_code == 0
    result = runner.invoke(app, ["calibrate", str(target), "--events", str(events), "--format", "01", "-d", "3",
                                 "-r", "3", "--basis", basis, "--out", str(tmp_path / "c"), "--no-stages", "--json"])
    assert result.exit_code == 0, result.stderr
    doc = json.loads(result.stdout)
    assert all(c["low"] == 0 for c in doc["components"].values()), doc["components"]
    assert [o["qubit"] for o in doc["outliers"] if o["kind"] == "qubit"] == ([bad] if bad else [])
