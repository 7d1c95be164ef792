"""The bad-input matrix, command by command: a missing file or directory, malformed TOML, a bad
value, a directory with no samples, an out directory that cannot be written. Each must exit 2
with exactly one line on stderr (naming what was wrong) and no traceback."""

from __future__ import annotations

import dataclasses
import shutil
from collections.abc import Callable
from pathlib import Path

import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.config import EXAMPLE_TOML
from planner.sweep import StoppingRule
from tests.helpers.sampled import SampleOnce, copy_out

runner = CliRunner()

#: two distances, two joint points: a model exists, so every query command gets past its fit
SMALL_TOML = EXAMPLE_TOML
RULE = StoppingRule(max_errors=100, max_shots=20_000)


@dataclasses.dataclass(frozen=True)
class Places:
    target: Path  # a valid target file
    malformed: Path  # not TOML
    bad_value: Path  # TOML with an out-of-range value
    missing: Path  # nothing there
    a_file: Path  # a regular file (as --out, or as a parent of --out)
    sampled: Path  # a real out directory with samples (no [roadmap] in its target)
    no_samples: Path  # an out directory with target.toml and manifest.json but no samples
    empty_dir: Path  # an empty directory
    bad_target_dir: Path  # an out directory whose target.toml is not TOML
    bad_manifest_dir: Path  # samples but a manifest.json that is not JSON
    verify_blocked: Path  # samples, and DIR/verify is a regular file


@pytest.fixture(scope="module")
def places(tmp_path_factory: pytest.TempPathFactory, sample_once: SampleOnce) -> Places:
    root = tmp_path_factory.mktemp("bad")
    target = root / "small.toml"
    target.write_text(SMALL_TOML)
    malformed = root / "malformed.toml"
    malformed.write_text("[device\nname = 'x'\n")
    bad_value = root / "bad_value.toml"
    bad_value.write_text(SMALL_TOML.replace("gate_2q = 0.005", "gate_2q = 2.0"))
    a_file = root / "a-file"
    a_file.write_text("not a directory\n")
    sampled = copy_out(sample_once(SMALL_TOML, rule=RULE, workers=2), root / "sampled")
    no_samples = root / "no_samples"
    no_samples.mkdir()
    for name in ("target.toml", "manifest.json"):
        shutil.copy(sampled / name, no_samples / name)
    empty_dir = root / "empty"
    empty_dir.mkdir()
    bad_target_dir = root / "bad_target_dir"
    shutil.copytree(sampled, bad_target_dir)
    (bad_target_dir / "target.toml").write_text("[goal\n")
    bad_manifest_dir = root / "bad_manifest_dir"
    shutil.copytree(sampled, bad_manifest_dir)
    (bad_manifest_dir / "manifest.json").write_text("{not json")
    verify_blocked = root / "verify_blocked"
    shutil.copytree(sampled, verify_blocked)
    (verify_blocked / "verify").write_text("a file where DIR/verify/ should go\n")
    return Places(target, malformed, bad_value, root / "missing", a_file, sampled, no_samples, empty_dir,
                  bad_target_dir, bad_manifest_dir, verify_blocked)


Case = tuple[str, Callable[[Places], list[str]], str]


def _p(attr: str, *rest: str) -> Callable[[Places], str]:
    return lambda pl: str(Path(getattr(pl, attr), *rest))


def case(cmd: str, *parts: str | Callable[[Places], str], needle: str, xfail: str | None = None) -> object:
    """One matrix row: the argument list (callables resolved against the fixture), a text the
    error line must contain, and (for a known misbehaviour) the reason it is expected to fail."""
    def args(pl: Places) -> list[str]:
        return [cmd, *(p(pl) if callable(p) else p for p in parts)]
    marks = [pytest.mark.xfail(strict=True, reason=xfail)] if xfail else []
    return pytest.param(args, needle, id=f"{cmd}:{needle}", marks=marks)


T, MAL, BAD, MISS = _p("target"), _p("malformed"), _p("bad_value"), _p("missing")
FILE, SAMPLED, NOSAMP, EMPTY = _p("a_file"), _p("sampled"), _p("no_samples"), _p("empty_dir")
OUT = _p("missing", "out")  # a fresh directory, never created because the command fails first


MATRIX = [
    # run
    case("run", _p("missing", "x.toml"), "--out", OUT, needle="x.toml: no such target file"),
    case("run", MAL, "--out", OUT, needle="malformed.toml: not valid TOML"),
    case("run", BAD, "--out", OUT, needle="device.errors.gate_2q"),
    case("run", T, "--out", OUT, "--budget", "huge", needle="--budget"),
    case("run", T, "--out", OUT, "--workers", "0", needle="--workers"),
    case("run", T, "--out", FILE, needle="exists and is not a directory"),
    case("run", T, "--out", _p("a_file", "sub"), needle="cannot create the"),
    # sweep
    case("sweep", _p("missing", "x.toml"), "--out", OUT, needle="x.toml: no such target file"),
    case("sweep", MAL, "--out", OUT, needle="malformed.toml: not valid TOML"),
    case("sweep", BAD, "--out", OUT, needle="device.errors.gate_2q"),
    case("sweep", T, "--out", OUT, "--shard", "3/2", needle="--shard"),
    case("sweep", T, "--out", OUT, "--budget", "huge", needle="--budget"),
    case("sweep", T, "--out", FILE, needle="exists and is not a directory"),
    case("sweep", T, "--out", _p("a_file", "sub"), needle="cannot create the"),
    # fit
    case("fit", MISS, needle="no such out directory"),
    case("fit", EMPTY, needle="target.toml"),
    case("fit", NOSAMP, needle="no samples"),
    case("fit", _p("bad_target_dir"), needle="target.toml: not valid TOML"),
    case("fit", FILE, needle="exists and is not a directory"),
    # ask
    case("ask", MISS, needle="no such out directory"),
    case("ask", NOSAMP, needle="no samples"),
    case("ask", _p("bad_target_dir"), needle="target.toml: not valid TOML"),
    case("ask", SAMPLED, "--target", "2.0", needle="--target: 2.0"),
    case("ask", SAMPLED, "--distance", "4", needle="--distance: 4"),
    case("ask", SAMPLED, "--distance", "5", "--qubits", "100", needle="--qubits"),
    case("ask", "--lambda", "2", "--eps", "1e-3", "--target", "1e-6", needle="--distance"),
    case("ask", "--lambda", "-1", "--eps", "1e-3", "--distance", "5", "--target", "1e-6", needle="--lambda: -1"),
    # roadmap
    case("roadmap", MISS, needle="no such out directory"),
    case("roadmap", NOSAMP, needle="no samples"),
    case("roadmap", SAMPLED, needle="[roadmap]"),  # the target has no [roadmap]
    # sensitivity
    case("sensitivity", MISS, needle="no such out directory"),
    case("sensitivity", NOSAMP, needle="no samples"),
    case("sensitivity", _p("bad_target_dir"), needle="target.toml: not valid TOML"),
    # verify
    case("verify", MISS, needle="no such out directory"),
    case("verify", NOSAMP, needle="no samples"),
    case("verify", SAMPLED, "--budget", "huge", needle="--budget"),
    case("verify", SAMPLED, "--workers", "0", needle="--workers"),
    case("verify", _p("verify_blocked"), needle="exists and is not a directory"),
    # circuit
    case("circuit", _p("missing", "x.toml"), "--distance", "3", needle="x.toml: no such target file"),
    case("circuit", MAL, "--distance", "3", needle="malformed.toml: not valid TOML"),
    case("circuit", BAD, "--distance", "3", needle="device.errors.gate_2q"),
    case("circuit", T, "--distance", "4", needle="--distance"),
    # layout
    case("layout", _p("missing", "x.toml"), "--distance", "3", needle="x.toml: no such target file"),
    case("layout", BAD, "--distance", "3", needle="device.errors.gate_2q"),
    case("layout", T, "--distance", "4", needle="--distance"),
    # spread
    case("spread", _p("missing", "x.toml"), "--out", OUT, needle="x.toml: no such target file"),
    case("spread", T, "--out", OUT, needle="nothing to draw instances from"),
    case("spread", T, "--out", OUT, "--draw", "spread", needle="needs a [device.spread]"),
    # merge
    case("merge", MISS, "--out", OUT, needle="no such out directory"),
    case("merge", EMPTY, "--out", OUT, needle="manifest.json"),
    case("merge", NOSAMP, "--out", OUT, needle="no samples"),
    case("merge", SAMPLED, "--out", FILE, needle="exists and is not a directory"),
    case("merge", SAMPLED, "--out", _p("a_file", "sub"), needle="cannot create the"),
    # status
    case("status", MISS, needle="no such out directory"),
    case("status", NOSAMP, needle="no samples"),
    case("status", _p("bad_manifest_dir"), needle="manifest.json"),
    case("status", FILE, needle="exists and is not a directory"),
    case("merge", FILE, "--out", MISS, needle="exists and is not a directory"),
    # compare
    case("compare", MISS, SAMPLED, needle="no such out directory"),
    case("compare", SAMPLED, NOSAMP, needle="no samples"),
    case("compare", SAMPLED, SAMPLED, needle="same directory"),
    case("compare", SAMPLED, _p("bad_target_dir"), "--out", FILE, needle="exists and is not a directory"),
    # ask, calculator uncertainties
    case("ask", "--lambda", "2", "--eps", "1e-3", "--distance", "5", "--target", "1e-6", "--eps-sigma", "1",
         needle="--eps-sigma"),
    # leakage
    case("leakage", _p("missing", "x.toml"), "--distance", "3", needle="x.toml: no such target file"),
    case("leakage", MAL, "--distance", "3", needle="malformed.toml: not valid TOML"),
    case("leakage", BAD, "--distance", "3", needle="device.errors.gate_2q"),
    case("leakage", T, "--distance", "3", needle="device.leakage: missing section"),
    case("leakage", T, "--distance", "4", needle="--distance"),
    # events, calibrate (bad data files: tests/devicedata/test_events.py)
    case("events", _p("missing", "x.toml"), "-d", "3", "-r", "3", "--shots", "10", "--out", _p("missing", "e.b8"),
         needle="x.toml: no such target file"),
    case("events", T, "-d", "4", "-r", "3", "--shots", "10", "--out", _p("missing", "e.b8"), needle="--distance"),
    case("calibrate", _p("missing", "x.toml"), "--events", FILE, "-d", "3", "-r", "3", "--out", OUT,
         needle="x.toml: no such target file"),
    case("calibrate", T, "--events", MISS, "-d", "3", "-r", "3", "--out", OUT, needle="no such file"),
]


@pytest.mark.parametrize(("make_args", "needle"), MATRIX)
def test_bad_input_is_one_line_and_exit_2(places: Places, make_args: Callable[[Places], list[str]],
                                          needle: str) -> None:
    args = make_args(places)
    # the needle must be the message's own words: a needle inside a path argument is echoed
    # back with the path and passes whatever the message says
    root = str(places.target.parent)
    assert not any(needle in a for a in args if a.startswith(root)), (needle, args)
    fresh = Path(places.missing, "out")
    result = runner.invoke(app, args)
    debris = fresh.exists()
    shutil.rmtree(places.missing, ignore_errors=True)
    assert "Traceback" not in result.stderr and "Traceback" not in result.stdout, result.stderr
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert result.exit_code == 2, (args, result.stderr, result.stdout[-500:])
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, (args, result.stderr)
    assert needle in lines[0], (args, lines[0])
    assert not debris  # a command refusing its input creates no out directory


def test_the_matrix_covers_every_command() -> None:
    from typer.main import get_command

    commands = set(get_command(app).commands)  # type: ignore[attr-defined]
    covered = {p.id.split(":")[0] for p in MATRIX}  # type: ignore[attr-defined]
    assert commands <= covered, commands - covered
