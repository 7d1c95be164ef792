"""Which exceptions the command line turns into one line and exit 2: InputError (its field shown
as the option) and file errors; a bare ValueError or an OSError without a file is a bug and keeps
its traceback."""

from __future__ import annotations

import errno

import pytest
import typer

from planner.cli._common import EXIT_BAD_INPUT, OPTION_OF_FIELD, one_line_errors
from planner.errors import InputError


def raising(exc: BaseException):
    @one_line_errors
    def command() -> None:
        raise exc

    return command


@pytest.mark.parametrize(("exc", "line"), [
    (InputError("3/2 is not K/N", field="shard", allowed="1 <= K <= N"), "--shard: 3/2 is not K/N; allowed: 1 <= K <= N"),
    (InputError("too large", field="device.errors.gate_2q", source="t.toml"), "t.toml: device.errors.gate_2q: too large"),
    (FileNotFoundError(errno.ENOENT, "No such file or directory", "x/target.toml"), "x/target.toml: No such file"),
    (OSError(errno.ENOSPC, "No space left on device", "out/samples/a.csv"), "out/samples/a.csv: No space left"),
    (OSError(errno.EROFS, "Read-only file system", "out/manifest.json"), "out/manifest.json: Read-only"),
])
def test_bad_input_and_file_errors_are_one_line(exc: BaseException, line: str, capsys) -> None:
    with pytest.raises(typer.Exit) as done:
        raising(exc)()
    assert done.value.exit_code == EXIT_BAD_INPUT
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"planner: error: {line}")


@pytest.mark.parametrize("exc", [
    ValueError("math domain error"), KeyError("gate_2q"), OSError(errno.EPIPE, "Broken pipe"), ZeroDivisionError(),
])
def test_bugs_keep_their_traceback(exc: BaseException, capsys) -> None:
    with pytest.raises(type(exc)):
        raising(exc)()
    assert capsys.readouterr().err == ""


def test_every_mapped_option_is_an_option() -> None:
    assert all(o.startswith("--") and " " not in o for o in OPTION_OF_FIELD.values())
