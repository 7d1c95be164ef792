"""Target-file validation: every bad file gives one line naming the file and the key path."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.config import EXAMPLE_TOML, COMPONENTS, load_target, parse_target
from planner.errors import InputError
from planner.noise import NoiseModel, pauli_error_from_infidelity

runner = CliRunner()


def test_example_parses_into_frozen_objects():
    t = parse_target(EXAMPLE_TOML, source="example.toml")
    assert t.device.native_2q == "cz"
    assert t.sweep.distances == (3, 5)
    assert t.sweep.bases == ("z", "x")
    assert t.components == tuple(c for c in COMPONENTS if c != "leakage")  # no [device.leakage]
    with pytest.raises(Exception):
        t.goal.max_qubits = 3  # frozen


def test_demo_target_is_valid():
    t = load_target("targets/demo.toml")
    m = NoiseModel.from_target(t)
    assert m.native_2q == "cz"
    assert 0 < m.probability("gate_2q") < 0.01


def test_rb_infidelity_is_converted():
    text = EXAMPLE_TOML.replace("gate_2q = 0.005", "gate_2q_infidelity = 0.004")
    m = NoiseModel.from_target(parse_target(text))
    # r = p * D / (D + 1), D = 4 (Nielsen, Phys. Lett. A 303, 249 (2002))
    assert m.gate_2q == pytest.approx(0.004 * 5 / 4)
    assert m.gate_2q == pytest.approx(pauli_error_from_infidelity(0.004, num_qubits=2))


def test_hash_changes_with_content():
    a = parse_target(EXAMPLE_TOML)
    b = parse_target(EXAMPLE_TOML.replace("0.005", "0.006"))
    assert a.sha256 != b.sha256 and len(a.sha256) == 64


BAD = {
    "unknown key": (("gate_2q = 0.005", "gate2q = 0.005"), "device.errors.gate2q", "did you mean 'gate_2q'"),
    "negative probability": (("readout = 0.01", "readout = -0.01"), "device.errors.readout", "greater than or equal to 0"),
    "too-large probability": (("readout = 0.01", "readout = 0.7"), "device.errors.readout", "too large"),
    "T2 > 2 T1": (("t2_us = 40.0", "t2_us = 140.0"), "device.coherence.t2_us", "T2 <= 2*T1"),
    "even distance": (("distances = [3, 5]", "distances = [3, 4]"), "sweep.distances", "odd"),
    "too small distance": (("distances = [3, 5]", "distances = [1, 3]"), "sweep.distances", ">= 3"),
    "missing section": (("[goal]\nlogical_error_per_cycle = 1e-6\nmax_qubits = 1000\n", ""), "goal", "missing"),
    "wrong type": (("t1_us = 50.0", 't1_us = "long"'), "device.coherence.t1_us", "number"),
    "bad choice": (('native_2q = "cz"', 'native_2q = "iswap"'), "device.native_2q", "'cz' or 'cx'"),
    "missing gate error": (("gate_1q = 0.001\n", ""), "device.errors.gate_1q", "missing"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_bad_target_names_file_and_field(case, tmp_path):
    (old, new), field, words = BAD[case]
    assert old in EXAMPLE_TOML
    path = tmp_path / "bad.toml"
    path.write_text(EXAMPLE_TOML.replace(old, new))
    with pytest.raises(InputError) as info:
        load_target(path)
    msg = str(info.value)
    assert msg.startswith(f"{path}: {field}")
    assert words in msg
    assert "\n" not in msg


@pytest.mark.parametrize("case", ["unknown key", "T2 > 2 T1", "wrong type"])
def test_bad_target_on_the_command_line_is_one_line_exit_2(case, tmp_path):
    (old, new), field, _ = BAD[case]
    path = tmp_path / "bad.toml"
    path.write_text(EXAMPLE_TOML.replace(old, new))
    result = runner.invoke(app, ["run", str(path), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and field in lines[0]
    assert "Traceback" not in result.output


def test_malformed_toml_and_missing_file(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text("[device\nname = 1")
    with pytest.raises(InputError, match="not valid TOML"):
        load_target(path)
    with pytest.raises(InputError, match="no such target file"):
        load_target(tmp_path / "nope.toml")
