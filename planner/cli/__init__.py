"""The ``planner`` command line. Each command lives in its own module with a ``register(app)``.

Commands parse, call the library, render. No planning logic lives here.
"""

from __future__ import annotations

import typer

from planner.cli import (
    ask,
    circuit,
    fit,
    merge,
    roadmap,
    run,
    sensitivity,
    status,
    sweep,
    verify,
)

app = typer.Typer(
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

for _module in (run, sweep, fit, ask, roadmap, sensitivity, verify, circuit, merge, status):
    _module.register(app)


def main() -> None:
    app()
