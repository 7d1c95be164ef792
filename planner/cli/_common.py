"""Shared plumbing for the command modules: consoles, one-line errors, exit codes."""

from __future__ import annotations

import functools
import os
import sys
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


def fail(message: str) -> typer.Exit:
    """Print one line on stderr and return the Exit to raise (code 2)."""
    print(f"planner: error: {printable(message)}", file=sys.stderr)
    return typer.Exit(code=EXIT_BAD_INPUT)


#: Library parameter names (``InputError.field``) and the options that set them.
OPTION_OF_FIELD: dict[str, str] = {
    "budget": "--budget", "workers": "--workers", "precision": "--precision", "shard": "--shard",
    "cluster": "--cluster", "out_dir": "--out", "distance": "--distance", "qubits": "--qubits",
    "eps_target": "--target", "suppression": "--lambda", "eps": "--eps", "rounds": "--rounds",
    "basis": "--basis", "scales": "--scale", "max_cpu": "--max-cpu",
}


def one_line_errors(func: F) -> F:
    """Turn :class:`InputError` (and file-system errors) into one line on stderr and exit 2."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except InputError as exc:
            raise fail(exc.describe(options=OPTION_OF_FIELD)) from None
        except (FileNotFoundError, IsADirectoryError, NotADirectoryError, PermissionError) as exc:
            where = getattr(exc, "filename", None) or ""
            raise fail(f"{where}: {exc.strerror or exc}") from None

    return wrapper  # type: ignore[return-value]
