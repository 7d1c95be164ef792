"""`planner circuit`: the printed circuit, and one-line errors for every bad option."""

from __future__ import annotations

from pathlib import Path

import pytest
import stim
from typer.testing import CliRunner

from planner.circuits import build_memory_circuit
from planner.cli import app
from planner.config import EXAMPLE_TOML, parse_target
from planner.noise import NoiseModel

runner = CliRunner()


@pytest.fixture
def target(tmp_path: Path) -> Path:
    path = tmp_path / "small.toml"
    path.write_text(EXAMPLE_TOML)
    return path


def test_prints_the_noisy_circuit(target: Path) -> None:
    result = runner.invoke(app, ["circuit", str(target), "--distance", "5"])
    assert result.exit_code == 0, result.stderr
    assert result.stderr == ""
    circuit = stim.Circuit(result.stdout)
    # distance 5: the shortest logical error has 5 faults (common practice, no source)
    assert len(circuit.shortest_graphlike_error()) == 5
    assert circuit.num_observables == 1
    # rounds default to the distance: 5 rounds of 24 ancillas plus 25 data readouts
    assert circuit.num_measurements == 5 * 24 + 25
    assert not any(i.name == "CX" for i in circuit.flattened())  # the example device is CZ-native


def test_output_is_what_the_sweep_samples(target: Path) -> None:
    args = ["circuit", str(target), "-d", "3", "--basis", "x", "--rounds", "2",
            "--scale", "gate_2q=0.5", "--scale", "idle_measure=0"]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.stderr
    model = NoiseModel.from_target(parse_target(EXAMPLE_TOML)).with_scales(
        {"gate_2q": 0.5, "idle_measure": 0.0})
    expected = build_memory_circuit(model, code="surface", distance=3, rounds=2, basis="x")
    assert stim.Circuit(result.stdout) == expected
    assert "DEPOLARIZE2(0.0025)" in result.stdout


def test_rounds_from_the_target(tmp_path: Path) -> None:
    path = tmp_path / "rep.toml"
    path.write_text(EXAMPLE_TOML.replace("[sweep]", '[sweep]\ncode = "repetition"\nrounds = 2'))
    result = runner.invoke(app, ["circuit", str(path), "--distance", "3"])
    assert result.exit_code == 0, result.stderr
    circuit = stim.Circuit(result.stdout)
    assert circuit.num_measurements == 2 * 2 + 3  # 2 rounds of 2 ancillas, 3 data qubits


@pytest.mark.parametrize(("args", "needle"), [
    (["--distance", "4"], "--distance"),
    (["--distance", "1"], "--distance"),
    (["--distance", "three"], "--distance"),
    ([], "--distance"),
    (["--distance", "3", "--basis", "y"], "--basis"),
    (["--distance", "3", "--rounds", "0"], "--rounds"),
    (["--distance", "3", "--rounds", "2.5"], "--rounds"),
    (["--distance", "3", "--scale", "gate_2q"], "COMPONENT=FACTOR"),
    (["--distance", "3", "--scale", "gate_2q=half"], "--scale"),
    (["--distance", "3", "--scale", "gate2q=0.5"], "did you mean 'gate_2q'"),
    (["--distance", "3", "--scale", "readout=-1"], ">= 0"),
    (["--distance", "3", "--scale", "readout=nan"], ">= 0"),
    (["--distance", "3", "--scale", "readout=100"], "outside"),
    (["--distance", "3", "--scale", "reset=1", "--scale", "reset=2"], "twice"),
])
def test_bad_options_are_one_line_and_exit_2(target: Path, args: list[str], needle: str) -> None:
    result = runner.invoke(app, ["circuit", str(target), *args])
    assert result.exit_code == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert needle in lines[0]
    assert "Traceback" not in result.stderr


def test_repetition_code_rejects_basis_x(tmp_path: Path) -> None:
    path = tmp_path / "rep.toml"
    path.write_text(EXAMPLE_TOML.replace("[sweep]", '[sweep]\ncode = "repetition"'))
    result = runner.invoke(app, ["circuit", str(path), "--distance", "3", "--basis", "x"])
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "--basis" in result.stderr and "'z'" in result.stderr


def test_missing_target_file_is_one_line(tmp_path: Path) -> None:
    result = runner.invoke(app, ["circuit", str(tmp_path / "nope.toml"), "--distance", "3"])
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and "nope.toml: no such target file" in result.stderr
