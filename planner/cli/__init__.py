"""The ``planner`` command line. Each command lives in its own module with a ``register(app)``.

Commands parse, call the library, render. No planning logic lives here.
"""

from __future__ import annotations

import contextlib
import sys
from typing import Any

import typer
from typer.core import TyperGroup

try:  # typer >= 0.20 carries its own copy of click
    from typer._click.exceptions import ClickException, NoArgsIsHelpError, UsageError
except ImportError:  # pragma: no cover - older typer on top of click
    from click.exceptions import ClickException, UsageError

    class NoArgsIsHelpError(UsageError):  # type: ignore[no-redef]
        pass

from planner.cli._common import printable
from planner.cli import (
    ask,
    calibrate,
    circuit,
    compare,
    events,
    fit,
    layout,
    leakage,
    merge,
    roadmap,
    run,
    sensitivity,
    spread,
    status,
    sweep,
    verify,
)



class _OneLineErrors(TyperGroup):
    """Usage errors (unknown option, bad value) as one line on stderr, exit 2, like every other
    bad input; the boxed multi-line form is for help screens only."""

    def main(self, *args: Any, standalone_mode: bool = True, **kwargs: Any) -> Any:
        if not standalone_mode:
            return super().main(*args, standalone_mode=False, **kwargs)
        argv = list(args[0] if args else kwargs.get("args") or sys.argv[1:])
        if len(argv) == 1 and self._needs_arguments(argv[0]):
            self._help_to_stderr(argv[0], prog_name=kwargs.get("prog_name") or self.name or "planner")
            sys.exit(2)
        try:
            rv = super().main(*args, standalone_mode=False, **kwargs)
        except NoArgsIsHelpError:  # plain `planner`: the overview, already printed on stdout
            sys.exit(0)
        except UsageError as exc:
            where = exc.ctx.command_path if exc.ctx is not None else "planner"
            print(f"planner: error: {where}: {printable(exc.format_message())}", file=sys.stderr)
            sys.exit(exc.exit_code)
        except ClickException as exc:
            print(f"planner: error: {printable(exc.format_message())}", file=sys.stderr)
            sys.exit(exc.exit_code)
        except typer.Abort:
            print("planner: aborted", file=sys.stderr)
            sys.exit(1)
        sys.exit(rv if isinstance(rv, int) else 0)

    def _needs_arguments(self, name: str) -> bool:
        command = self.commands.get(name)
        return command is not None and bool(getattr(command, "no_args_is_help", False))

    def _help_to_stderr(self, name: str, *, prog_name: str) -> None:
        """A command called with nothing is a usage error (exit 2), not a request for help: its
        help goes to stderr so that scripts and pipes see the failure."""
        command = self.commands[name]
        with self.make_context(prog_name, [name], resilient_parsing=True) as parent:
            ctx = command.make_context(name, [], parent=parent, resilient_parsing=True)
            with contextlib.redirect_stdout(sys.stderr):
                text = ctx.get_help()  # rich prints it (to the redirected stdout) and returns ""
            if text:
                print(text, file=sys.stderr)


app = typer.Typer(
    cls=_OneLineErrors,
    name="planner",
    help=(
        "Error-budget planning for surface-code memory experiments: sample logical error per "
        "cycle over scaled noise, fit Lambda, and turn the fits into requirements, roadmaps and "
        "sensitivities. Projections are model-based: check them against the device."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)



@app.callback()
def _root() -> None:
    """Error-budget planning for surface-code memory experiments."""


for _module in (run, sweep, fit, ask, roadmap, sensitivity, verify, circuit, merge, status, compare,
                leakage, layout, spread, events, calibrate):
    _module.register(app)


def main() -> None:
    app()
