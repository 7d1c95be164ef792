"""`planner ask`: what the goal needs (from DIR), or the calculator from measured numbers."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, plain, stderr_console, stdout_console
from planner.cli.options import JsonOpt

P_GOAL, P_CALC = "Goal", "Calculator (measured numbers, no DIR)"


def register(app: typer.Typer) -> None:
    app.command("ask", no_args_is_help=True,
                help="Required Lambda and factors (joint, each component alone, cheapest mix) for a "
                "logical error per cycle at a distance; or, with --lambda/--eps/--distance, the "
                "distance and qubits from measured numbers.")(ask_command)


@one_line_errors
def ask_command(
    directory: Annotated[Path | None, typer.Argument(help="Out directory of a sweep.")] = None,
    target: Annotated[float | None, typer.Option(
        "--target", help="Logical error per cycle to reach (default: the goal in DIR/target.toml).",
        rich_help_panel=P_GOAL)] = None,
    distance: Annotated[int | None, typer.Option(
        "--distance", help="Code distance (odd). With DIR: answer at this distance (default: the "
        "largest within goal.max_qubits). Calculator: the distance --eps was measured at.",
        rich_help_panel=P_GOAL)] = None,
    qubits: Annotated[int | None, typer.Option(
        "--qubits", help="Physical qubit budget: the largest odd d with 2d^2-1 <= Q.",
        rich_help_panel=P_GOAL)] = None,
    lambda_: Annotated[float | None, typer.Option(
        "--lambda", help="Measured suppression factor Lambda.", rich_help_panel=P_CALC)] = None,
    eps: Annotated[float | None, typer.Option(
        "--eps", help="Measured logical error per cycle at --distance.", rich_help_panel=P_CALC)] = None,
    json: JsonOpt = False,
) -> None:
    from planner.errors import InputError
    from planner.reports.tables import json_text, render_calculator, render_requirements

    if lambda_ is not None or eps is not None:
        if directory is not None:
            raise InputError("calculator mode (--lambda/--eps) takes no DIR")
        missing = [n for n, v in (("--lambda", lambda_), ("--eps", eps), ("--distance", distance),
                                  ("--target", target)) if v is None]
        if missing:
            raise InputError(f"calculator mode needs {', '.join(missing)}")
        if qubits is not None:
            raise InputError("--qubits is not used in calculator mode")
        from planner.planning import calculate

        ans = calculate(suppression=lambda_, eps=eps, distance=distance, eps_target=target)
        if json:
            typer.echo(json_text(ans.to_json()))
        else:
            render_calculator(ans, stdout_console())
        return
    if directory is None:
        raise InputError("give DIR (an out directory) or --lambda, --eps, --distance, --target")
    from planner.planning import answer_all, load_out_dir, no_model_reason

    spec, stats = load_out_dir(directory)
    answers = answer_all(spec, stats, eps_target=target, distance=distance, qubits=qubits)
    if answers.requirements is None:
        if json:
            typer.echo(json_text({"requirements": None, "note": no_model_reason(answers.fits)}))
        else:
            stdout_console().print(no_model_reason(answers.fits))
        return
    from planner.reports.files import lambda_today_model, write_requirements

    written = write_requirements(answers.requirements, directory, uncertainty=answers.uncertainty,
                                 lambda_today_model=lambda_today_model(answers))
    stderr_console(quiet=json).print(f"wrote {', '.join(p.name for p in written)} under {plain(directory)}")
    if json:
        doc = answers.requirements.to_json()
        doc["confidence"] = answers.fits.to_json()["confidence"]
        typer.echo(json_text(doc))
        return
    render_requirements(answers.requirements, stdout_console())
