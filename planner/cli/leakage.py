"""`planner leakage`: the leaked population and detection probability against round (stopped at
several depths), the rate equations beside them, and what leakage removal is worth against a
better two-qubit gate."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stdout_console
from planner.errors import InputError


def register(app: typer.Typer) -> None:
    app.command("leakage", no_args_is_help=True,
                help="Leaked population and detection probability per round, the rate equations, "
                "and what leakage removal is worth (needs [device.leakage]).")(leakage_command)


def _positive(text: str | None, *, field: str, default: int | None = None, odd: bool = False) -> int:
    if text is None:
        if default is None:
            raise InputError("missing: give an integer", field=field)
        return default
    try:
        value = int(text.strip())
    except ValueError:
        raise InputError(f"{text!r} is not an integer", field=field) from None
    if value < 1 or (odd and (value < 3 or value % 2 == 0)):
        raise InputError(f"{value} is not allowed", field=field,
                         allowed="an odd integer >= 3" if odd else "an integer >= 1")
    return value


@one_line_errors
def leakage_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML) with a [device.leakage] section.")],
    distance: Annotated[str | None, typer.Option("--distance", "-d", metavar="D",
                                                 help="Code distance (odd, >= 3).")] = None,
    rounds: Annotated[str | None, typer.Option("--rounds", "-r", metavar="R",
                                               help="Rounds of the longest experiment (default 4 d).")] = None,
    shots: Annotated[str | None, typer.Option("--shots", metavar="N",
                                              help="Shots per depth for the populations (default 4096).")] = None,
    errors: Annotated[str | None, typer.Option("--errors", metavar="N", help="Logical errors per variant "
                                               "for the removal comparison (default 200; 0 skips it).")] = None,
    workers: Annotated[str | None, typer.Option("--workers", metavar="N", help="Sampling processes.")] = None,
    out: Annotated[Path | None, typer.Option("--out", metavar="DIR", help="Write JSON, CSV and PNG here.")] = None,
    lever: Annotated[str | None, typer.Option("--removal-lever", metavar="reset|data|both", help=(
        "Also answer which removal efficiency (measure-qubit reset, data-qubit step, or both) meets "
        "the goal: samples the target's distances at efficiencies 0, 0.5, 0.9, 1."))] = None,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object on stdout.")] = False,
) -> None:
    from planner.config import load_target, size_problem
    from planner.jobs.leakage import run_leakage_study
    from planner.sampling.work import check_workers, default_workers

    spec = load_target(target)
    d = _positive(distance, field="distance", odd=True)
    r = _positive(rounds, field="rounds", default=4 * d)
    if (problem := size_problem(code=spec.sweep.code, distance=d, rounds=r)) is not None:
        raise InputError(problem, field="rounds")
    n = _positive(shots, field="shots", default=4096)
    e = 200 if errors is None or errors.strip() == "0" else _positive(errors, field="errors")
    w = check_workers(_positive(workers, field="workers", default=default_workers()))
    study = run_leakage_study(spec, distance=d, rounds=r, shots=n, max_errors=e, max_shots=1000 * e,
                              workers=w or 1, compare=not (errors or "").strip() == "0")
    answer = None
    if lever is not None:
        from planner.jobs.leakage_lever import removal_lever

        answer = removal_lever(spec, lever=lever.strip().lower(), max_errors=e, max_shots=1000 * e, workers=w or 1)
    if as_json:
        typer.echo(json.dumps({**study.to_json(), "removal_lever": answer.to_json() if answer else None}))
    else:
        from planner.reports.leakage import render, render_lever

        render(study, stdout_console())
        if answer is not None:
            render_lever(answer, stdout_console())
    if out is not None:
        from planner.reports.leakage import write

        say_written(write(study, out), out, quiet=as_json)
