"""Bad input found by stress-testing: each must exit 2 with one line naming the file or the option
and what is allowed, before anything large is built; user text prints as it was written."""

from __future__ import annotations

from pathlib import Path

import pytest
import typer
from rich.console import Console
from typer.testing import CliRunner

from planner.circuits import noiseless_memory_circuit
from planner.cli import app
from planner.cli._common import plain, printable
from planner.config import (
    EXAMPLE_TOML,
    MAX_DETECTORS,
    MAX_DISTANCE,
    load_target,
    memory_circuit_size,
    parse_target,
)
from planner.errors import InputError
from planner.sweep import StoppingRule, check_scale_points
from tests.helpers.sampled import SampleOnce, copy_out

runner = CliRunner()


def one_error_line(result: object) -> str:
    """The single stderr line of a refused command (exit 2, no traceback)."""
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code == 2, (result.exit_code, result.stderr, result.stdout[-300:])
    assert "Traceback" not in result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("planner: error: "), lines[0]
    return lines[0]


def edited(old: str, new: str) -> str:
    assert old in EXAMPLE_TOML, old
    return EXAMPLE_TOML.replace(old, new)


SWEEP = "joint_scales = [0.5, 1.0]"
ROADMAP = "[sweep]"  # a [roadmap] section goes in front of [sweep]

# (target text, key path the message starts with, words it must contain)
BAD_TARGETS = {
    "distance far too large": (edited("distances = [3, 5]", "distances = [3, 999]"),
                               "sweep.distances", f"3 to {MAX_DISTANCE}"),
    "a million rounds": (edited(SWEEP, SWEEP + "\nrounds = 1000000"),
                         "sweep.rounds", "rounds <= 131072"),
    "default rounds too many at the largest distance": (
        edited("distances = [3, 5]", "distances = [3, 5, 101]\nrounds = 200"), "sweep.rounds", "d=101"),
    "10^4 joint scale points": (
        edited(SWEEP, "joint_scales = [" + ", ".join(f"{1 + i / 10**4}" for i in range(10**4)) + "]"),
        "sweep.joint_scales", "at most 64"),
    "too many tasks": (
        edited("distances = [3, 5]", "distances = [" + ", ".join(str(d) for d in range(3, 51, 2)) + "]")
        .replace(SWEEP, SWEEP + "\ncomponent_scales = [" + ", ".join(f"{0.1 * i:.1f}" for i in range(2, 30))
                 + "]"), "sweep", "at most 4,000"),
    "rounds = true": (edited(SWEEP, SWEEP + "\nrounds = true"), "sweep.rounds", "integer"),
    "a distance written as a float": (edited("distances = [3, 5]", "distances = [3, 5.0]"),
                                      "sweep.distances[1]", "integer"),
    "gate_2q as a string": (edited("gate_2q = 0.005", 'gate_2q = "4.5e-3"'), "device.errors.gate_2q", "number"),
    "t1 as a boolean": (edited("t1_us = 50.0", "t1_us = true"), "device.coherence.t1_us", "number"),
    "nan probability": (edited("readout = 0.01", "readout = nan"), "device.errors.readout", "finite"),
    "empty components": (edited(SWEEP, SWEEP + "\ncomponents = []\ncomponent_scales = [0.5]"),
                         "sweep.components", "leave the key out"),
    "repetition code in basis x": (edited(SWEEP, SWEEP + '\ncode = "repetition"\nbases = ["x"]'),
                                   "sweep.bases", "'z' only"),
    "repetition code in both bases": (edited(SWEEP, SWEEP + '\ncode = "repetition"\nbases = ["z", "x"]'),
                                      "sweep.bases", "'z' only"),
    "max_qubits 10**18": (edited("max_qubits = 1000", "max_qubits = 1000000000000000000"),
                          "goal.max_qubits", "100000000"),
    "roadmap starts 9999-12-31": (edited(ROADMAP, "[roadmap]\nstart = 9999-12-31\n" + ROADMAP),
                                  "roadmap.start", "2200-12-31"),
    "roadmap starts 0001-01-01": (edited(ROADMAP, "[roadmap]\nstart = 0001-01-01\n" + ROADMAP),
                                  "roadmap.start", "1950-01-01"),
    "typo under [costs]": (edited(ROADMAP, "[costs]\nreaduot = 2.0\n" + ROADMAP),
                           "costs.readuot", "did you mean 'readout'?"),
    "typo under [roadmap.rates]": (
        edited(ROADMAP, "[roadmap]\nstart = 2026-01-01\n[roadmap.rates.gate2q]\nper_year = 0.1\n" + ROADMAP),
        "roadmap.rates.gate2q", "did you mean 'gate_2q'?"),
    "terminal escape in the device name": (edited('name = "example"', 'name = "Chip \\u001b[31mred"'),
                                           "device.name", "control character"),
    "newline in the device name": (edited('name = "example"', 'name = "Chip\\nB"'),
                                   "device.name", "control character"),
    "right-to-left override in the device name": (edited('name = "example"', 'name = "Chip \u202eB"'),
                                                  "device.name", "control character"),
    "1 MB device name": (edited('name = "example"', 'name = "' + "x" * 10**6 + '"'),
                         "device.name", "at most 200"),
    "empty device name": (edited('name = "example"', 'name = " "'), "device.name", "empty"),
}


@pytest.mark.parametrize("case", sorted(BAD_TARGETS))
def test_bad_target_is_refused_naming_the_key(case: str, tmp_path: Path) -> None:
    text, key, words = BAD_TARGETS[case]
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(InputError) as info:
        load_target(path)
    msg = str(info.value)
    assert msg.startswith(f"{path}: {key}: "), msg
    assert words in msg, msg
    assert "\n" not in msg and "\x1b" not in msg
    assert len(msg) < 600  # a huge value is named, not echoed


@pytest.mark.parametrize("case", ["distance far too large", "a million rounds", "10^4 joint scale points",
                                  "rounds = true", "gate_2q as a string", "typo under [costs]",
                                  "roadmap starts 9999-12-31", "1 MB device name",
                                  "terminal escape in the device name"])
@pytest.mark.parametrize("command", ["run", "sweep"])
def test_bad_target_on_the_command_line(case: str, command: str, tmp_path: Path) -> None:
    text, key, _ = BAD_TARGETS[case]
    path = tmp_path / "bad.toml"
    path.write_text(text)
    out = tmp_path / "out"
    line = one_error_line(runner.invoke(app, [command, str(path), "--out", str(out)]))
    assert f"bad.toml: {key}: " in line
    assert not out.exists()


def test_a_huge_target_file_is_refused_unread(tmp_path: Path) -> None:
    path = tmp_path / "huge.toml"
    path.write_text(EXAMPLE_TOML + "# " + "x" * 2**21 + "\n")
    with pytest.raises(InputError, match=r"huge.toml: larger than 1 MiB"):
        load_target(path)
    with pytest.raises(InputError, match="unknown key"):  # just below the limit: read and validated
        load_target(path.write_text(EXAMPLE_TOML + "\nfiller = '" + "x" * 10**6 + "'\n") and path)


def test_the_largest_realistic_grid_is_accepted() -> None:
    # d = 51 with a few hundred rounds is what a hardware team may ask for: within the limits
    t = parse_target(edited("distances = [3, 5]", "distances = [3, 51]\nrounds = 300"))
    assert t.sweep.distances == (3, 51) and t.sweep.rounds == 300
    # round counts default to d and 3d: the 3d circuits bound the distance (d = 69 fits)
    t = parse_target(edited("distances = [3, 5]", "distances = [3, 69]"))
    assert t.sweep.round_counts(69) == (69, 207)
    with pytest.raises(InputError, match=r"sweep\.distances: d=101 with 303 rounds .*round_multiples = \[1\]"):
        parse_target(edited("distances = [3, 5]", f"distances = [3, {MAX_DISTANCE}]"))
    t = parse_target(edited("distances = [3, 5]", f"distances = [3, {MAX_DISTANCE}]\nround_multiples = [1]"))
    assert max(t.sweep.distances) == MAX_DISTANCE  # r = d only: still allowed


@pytest.mark.parametrize(("code", "distance", "rounds", "basis"),
                         [("surface", 3, 1, "z"), ("surface", 5, 7, "x"), ("surface", 7, 2, "z"),
                          ("repetition", 3, 1, "z"), ("repetition", 9, 4, "z")])
def test_size_estimate_is_stim_s_size(code: str, distance: int, rounds: int, basis: str) -> None:
    circuit = noiseless_memory_circuit(code=code, distance=distance, rounds=rounds, basis=basis)
    qubits, detectors = memory_circuit_size(code=code, distance=distance, rounds=rounds)
    assert detectors == circuit.num_detectors
    used = {t.value for inst in circuit.flattened() for t in inst.targets_copy() if t.is_qubit_target}
    assert qubits == len(used)


def test_the_circuit_builder_refuses_before_building() -> None:
    with pytest.raises(ValueError, match="detectors"):
        noiseless_memory_circuit(code="surface", distance=3, rounds=MAX_DETECTORS, basis="z")
    with pytest.raises(ValueError, match=f"3 to {MAX_DISTANCE}"):
        noiseless_memory_circuit(code="repetition", distance=1001, rounds=1, basis="z")


@pytest.mark.parametrize(("args", "needle"), [
    (["-d", "1001"], f"--distance: 1001 is too large: odd distances from 3 to {MAX_DISTANCE}"),
    (["-d", "101", "-r", "103"], "--rounds: d=101 with 103 rounds has 1,050,600 detectors"),
    (["-d", "3", "--rounds", "1000000"], "--rounds: d=3 with 1000000 rounds"),
])
def test_circuit_command_refuses_huge_circuits(args: list[str], needle: str, tmp_path: Path) -> None:
    path = tmp_path / "t.toml"
    path.write_text(EXAMPLE_TOML)
    line = one_error_line(runner.invoke(app, ["circuit", str(path), *args]))
    assert needle in line and "allowed" in line


@pytest.mark.parametrize(("scales", "key", "most"), [
    ("component_scales = [300.0]", "sweep.component_scales", "187.5"),  # gate_2q 0.005 -> 15/16
    ("joint_scales = [0.5, 1.0, 60.0]", "sweep.joint_scales", "50"),  # readout 0.01 -> 0.5
])
def test_an_invalid_scale_names_its_key(scales: str, key: str, most: str, tmp_path: Path) -> None:
    path = tmp_path / "s.toml"
    path.write_text(edited(SWEEP, SWEEP + "\n" + scales) if "component" in scales else edited(SWEEP, scales))
    with pytest.raises(InputError, match=key):
        check_scale_points(load_target(path))
    out = tmp_path / "out"
    line = one_error_line(runner.invoke(app, ["run", str(path), "--out", str(out)]))
    assert f"s.toml: {key}: " in line and f"up to {most} " in line
    assert not out.exists()


@pytest.mark.parametrize("command", ["run", "sweep"])
@pytest.mark.parametrize("budget", ["", " quick", "huge"])
def test_budget_must_be_a_budget_name(command: str, budget: str, tmp_path: Path) -> None:
    path = tmp_path / "t.toml"
    path.write_text(EXAMPLE_TOML)
    out = tmp_path / "out"
    line = one_error_line(runner.invoke(app, [command, str(path), "--out", str(out), "--budget", budget]))
    assert "--budget" in line and "allowed: quick, standard, overnight" in line
    assert not out.exists()


@pytest.mark.parametrize("command", ["run", "sweep"])
@pytest.mark.parametrize("precision", ["1e-300", "0.0009", "0", "1", "nan"])
def test_precision_has_a_floor(command: str, precision: str, tmp_path: Path) -> None:
    path = tmp_path / "t.toml"
    path.write_text(EXAMPLE_TOML)
    out = tmp_path / "out"
    line = one_error_line(runner.invoke(app, [command, str(path), "--out", str(out), "--precision", precision]))
    assert line.startswith("planner: error: --precision: ") and "from 0.001" in line
    assert not out.exists()


def _commands_needing_arguments() -> list[str]:
    from typer.main import get_command

    group = get_command(app)
    return sorted(n for n, c in group.commands.items() if c.no_args_is_help)  # type: ignore[attr-defined]


@pytest.mark.parametrize("command", _commands_needing_arguments())
def test_a_command_without_arguments_is_a_usage_error(command: str) -> None:
    result = runner.invoke(app, [command])
    assert result.exit_code == 2
    assert result.stdout == ""
    assert f"planner {command}" in result.stderr and "Usage" in result.stderr  # its help, on stderr


def test_ask_is_among_them() -> None:
    assert {"ask", "fit", "sweep", "circuit"} <= set(_commands_needing_arguments())


def test_plain_planner_shows_the_overview() -> None:
    result = runner.invoke(app, [])
    assert result.exit_code == 0
    assert "Usage" in result.stdout and "ask" in result.stdout


def test_input_errors_print_control_characters_escaped(tmp_path: Path) -> None:
    line = one_error_line(runner.invoke(app, ["fit", str(tmp_path / "no\x1b[2Jdir")]))
    assert "\x1b" not in line and "\\x1b[2J" in line


# ---- user text printed by rich --------------------------------------------------------------


@pytest.mark.parametrize("text", ["Chip [/]", "[red]Chip", "Chip [bold]x[/bold] :smile:", "a\\b[", "[/"])
def test_plain_prints_user_text_as_written(text: str) -> None:
    con = Console(record=True, width=200, color_system="truecolor", emoji=False)
    con.print(f"[bold]{plain(text)}[/]: ok")
    assert con.export_text().strip() == f"{text}: ok"
    assert "\x1b[31m" not in con.export_text(styles=True)  # not coloured red
    assert printable("a\x1b[2Jb\u202e") == "a\\x1b[2Jb\\u202e"


@pytest.mark.parametrize("name", ["Chip [/]", "[red]Chip"])
def test_run_prints_the_device_name_as_written(name: str, tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    import planner.jobs.sweep

    def no_sampling(*args: object, **kwargs: object) -> None:
        raise typer.Exit(0)  # the header line is printed; the sampling itself is not under test

    monkeypatch.setattr(planner.jobs.sweep, "sample", no_sampling)
    path = tmp_path / "t.toml"
    path.write_text(edited('name = "example"', f'name = "{name}"'))
    result = runner.invoke(app, ["run", str(path), "--out", str(tmp_path / "o[/]")])
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code == 0, result.stderr
    assert result.stderr.startswith(f"{name}: ")
    assert "o[/]" in result.stderr


@pytest.fixture(scope="module")
def sampled_markup_dir(tmp_path_factory: pytest.TempPathFactory, sample_once: SampleOnce) -> Path:
    """A small sampled out directory whose path contains rich markup."""
    root = tmp_path_factory.mktemp("markup")
    sampled = sample_once(edited(SWEEP, 'joint_scales = [1.0]\nbases = ["z"]'), workers=1,
                          rule=StoppingRule(max_errors=20, max_shots=2_000), out_name="out [/] [red]x")
    return copy_out(sampled, root / sampled.out.name)


@pytest.mark.parametrize("command", ["fit", "status"])
def test_query_commands_print_a_markup_path_as_written(command: str, sampled_markup_dir: Path) -> None:
    result = runner.invoke(app, [command, str(sampled_markup_dir)])
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code == 0, result.stderr
    assert str(sampled_markup_dir) in (result.stderr + result.stdout).replace("\n", "")
