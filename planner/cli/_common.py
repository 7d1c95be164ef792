"""Shared plumbing for the command modules: consoles, one-line errors, exit codes.

Which exceptions become one line on stderr and exit 2 (:func:`one_line_errors`): the library's
:class:`~planner.errors.InputError` (its ``field`` shown as the option the user typed, through
:data:`OPTION_OF_FIELD`), and an ``OSError`` that names a file (missing, a directory, no
permission, a full disk, a read-only file system). Nothing else: a bare ``ValueError``,
``KeyError`` or an ``OSError`` without a file is a bug in planner and keeps its traceback, so it
gets reported and fixed (the library turns bad data into ``InputError`` where it reads it).
"""

from __future__ import annotations

import functools
import os
import sys
from pathlib import Path
import unicodedata
from collections.abc import Callable
from typing import Any, TypeVar

import rich.markup
import typer
from rich.console import Console

from planner.errors import InputError

F = TypeVar("F", bound=Callable[..., Any])

EXIT_BAD_INPUT = 2


def stderr_console(*, quiet: bool = False) -> Console:
    """Console for progress and chatter; stdout is reserved for data (tables, JSON)."""
    return Console(stderr=True, quiet=quiet)


def stdout_console() -> Console:
    """Console for data. Piped into a file or a CI log it is 110 columns wide (rich's default of
    80 would wrap the interval columns), unless COLUMNS says otherwise."""
    console = Console()
    if not console.is_terminal and "COLUMNS" not in os.environ:
        console = Console(width=110)
    return console


def printable(text: object) -> str:
    r"""``text`` with control and format characters (a terminal escape sequence, a newline, a
    right-to-left override) written as Python escapes, so printing it cannot steer the terminal
    or break a one-line message.

    >>> printable("Chip\x1b[31m red\nline")
    'Chip\\x1b[31m red\\nline'
    """
    out = []
    for ch in str(text):
        if unicodedata.category(ch) in ("Cc", "Cf"):
            out.append(ch.encode("unicode_escape").decode("ascii"))
        else:
            out.append(ch)
    return "".join(out)


def plain(text: object) -> str:
    r"""User text (a device name, a path, an address) for a rich ``print`` that uses markup: it
    prints as written, never as markup (``"Chip [/]"`` would crash rich, ``"[red]x"`` colour it),
    and never as control characters.

    >>> plain("Chip [red]x[/]")
    'Chip \\[red]x\\[/]'
    """
    return rich.markup.escape(printable(text))


def say_written(written: list[Path], directory: Path, *, quiet: bool) -> None:
    """One line on stderr naming the report files a command wrote."""
    stderr_console(quiet=quiet).print(f"wrote {', '.join(p.name for p in written)} under {plain(directory)}")


def fail(message: str) -> typer.Exit:
    """Print one line on stderr and return the Exit to raise (code 2)."""
    print(f"planner: error: {printable(message)}", file=sys.stderr)
    return typer.Exit(code=EXIT_BAD_INPUT)


#: Library parameter names (``InputError.field``) and the options that set them. A field that is
#: not here (a target key such as ``device.errors.gate_2q``) is shown as it is.
OPTION_OF_FIELD: dict[str, str] = {
    "budget": "--budget", "workers": "--workers", "precision": "--precision", "shard": "--shard",
    "cluster": "--cluster", "out_dir": "--out", "out": "--out", "distance": "--distance",
    "qubits": "--qubits", "eps_target": "--target", "suppression": "--lambda", "eps": "--eps",
    "rounds": "--rounds", "basis": "--basis", "scales": "--scale", "max_cpu": "--max-cpu",
    "max_cpu_seconds": "--max-cpu", "save": "--save",
    "instances": "--instances", "draw": "--draw", "shots": "--shots", "inject": "--inject",
    "fit": "--fit", "threshold": "--threshold", "format": "--format",
    "max_cpu_seconds": "--max-cpu", "save": "--save", "suppression_sigma": "--lambda-sigma",
    "eps_sigma": "--eps-sigma",
}


def error_line(exc: BaseException) -> str | None:
    """The one-line message for an exception the command line reports as bad input, or None for
    one that is a bug (and must keep its traceback).

    >>> error_line(InputError("'fast' is not a budget", field="budget", allowed="quick, standard"))
    "--budget: 'fast' is not a budget; allowed: quick, standard"
    >>> import errno
    >>> error_line(OSError(errno.EROFS, "Read-only file system", "out/x/manifest.json"))
    'out/x/manifest.json: Read-only file system'
    >>> error_line(ValueError("math domain error")) is None
    True
    """
    if isinstance(exc, InputError):
        return exc.describe(options=OPTION_OF_FIELD)
    if isinstance(exc, OSError) and getattr(exc, "filename", None):
        return f"{exc.filename}: {exc.strerror or exc}"
    return None


def one_line_errors(func: F) -> F:
    """Turn :class:`InputError` and file errors into one line on stderr and exit 2 (see the
    module docstring for why nothing else is)."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except (InputError, OSError) as exc:
            line = error_line(exc)
            if line is None:
                raise
            raise fail(line) from None

    return wrapper  # type: ignore[return-value]
