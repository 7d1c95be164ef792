"""`planner ask`: what the goal needs (from DIR), or the calculator from measured numbers."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from planner.cli._common import one_line_errors, stderr_console, stdout_console
from planner.cli.options import JsonOpt

if TYPE_CHECKING:
    from rich.console import Console

    from planner.planning import Answers

P_GOAL, P_CALC = "Goal", "Calculator (measured numbers, no DIR)"


def register(app: typer.Typer) -> None:
    app.command("ask", no_args_is_help=True,
                help="Required Lambda and factors (joint, each component alone, cheapest mix) for a "
                "logical error per cycle at a distance; or, with --lambda/--eps/--distance, the "
                "distance and qubits from measured numbers.")(ask_command)


@one_line_errors
def ask_command(
    directory: Annotated[Path | None, typer.Argument(help="Out directory of a sweep.")] = None,
    eps_target: Annotated[float | None, typer.Option(
        "--target", help="Logical error per cycle to reach (default: the goal in DIR/target.toml).",
        rich_help_panel=P_GOAL)] = None,
    distance: Annotated[int | None, typer.Option(
        "--distance", help="Code distance (odd). With DIR: answer at this distance (default: the "
        "largest within goal.max_qubits). Calculator: the distance --eps was measured at.",
        rich_help_panel=P_GOAL)] = None,
    qubits: Annotated[int | None, typer.Option(
        "--qubits", help="Physical qubit budget: the largest odd d whose code fits in Q (surface "
        "code 2d^2-1 qubits, repetition code 2d-1).", rich_help_panel=P_GOAL)] = None,
    lambda_: Annotated[float | None, typer.Option(
        "--lambda", help="Measured suppression factor Lambda.", rich_help_panel=P_CALC)] = None,
    eps: Annotated[float | None, typer.Option(
        "--eps", help="Measured logical error per cycle at --distance.", rich_help_panel=P_CALC)] = None,
    lambda_sigma: Annotated[float | None, typer.Option(
        "--lambda-sigma", help="One-sigma uncertainty of --lambda (then the answers carry intervals).",
        rich_help_panel=P_CALC)] = None,
    eps_sigma: Annotated[float | None, typer.Option(
        "--eps-sigma", help="One-sigma uncertainty of --eps (then the answers carry intervals).",
        rich_help_panel=P_CALC)] = None,
    save: Annotated[Path | None, typer.Option(
        "--save", metavar="PATH.md", help="Also write the answer to PATH.md (and PATH.csv). A what-if "
        "(--target, --distance or --qubits other than the goal) is otherwise only printed; the "
        "out directory's requirements.md always answers the goal. Inside DIR only whatif-*.md names.",
        rich_help_panel=P_GOAL)] = None,
    json: JsonOpt = False,
) -> None:
    from planner.errors import InputError

    if lambda_ is not None or eps is not None:
        if directory is not None:
            raise InputError("calculator mode (--lambda/--eps) takes no DIR")
        _calculator(lambda_=lambda_, eps=eps, distance=distance, eps_target=eps_target, qubits=qubits,
                    save=save, json=json, sigmas=(lambda_sigma, eps_sigma))
        return
    if lambda_sigma is not None or eps_sigma is not None:
        raise InputError("--lambda-sigma and --eps-sigma belong to calculator mode (--lambda, --eps)")
    if directory is None:
        raise InputError("give DIR (an out directory) or --lambda, --eps, --distance, --target")
    _review(directory, eps_target=eps_target, distance=distance, qubits=qubits, save=save, json=json)


def _calculator(*, lambda_: float | None, eps: float | None, distance: int | None,
                eps_target: float | None, qubits: int | None, save: Path | None, json: bool,
                sigmas: tuple[float | None, float | None] = (None, None)) -> None:
    """Calculator mode: parse the measured numbers, call the calculator, render."""
    from planner.errors import InputError
    from planner.planning import calculate
    from planner.reports.tables import json_text, render_calculator

    missing = [n for n, v in (("--lambda", lambda_), ("--eps", eps), ("--distance", distance),
                              ("--target", eps_target)) if v is None]
    if missing:
        raise InputError(f"calculator mode needs {', '.join(missing)}")
    if save is not None:
        raise InputError("--save is not used in calculator mode (there is no out directory)")
    ans = calculate(suppression=lambda_, eps=eps, distance=distance, eps_target=eps_target, qubits=qubits,
                    suppression_sigma=sigmas[0], eps_sigma=sigmas[1])
    if json:
        typer.echo(json_text(ans.to_json()))
    else:
        render_calculator(ans, stdout_console())


def _review(directory: Path, *, eps_target: float | None, distance: int | None, qubits: int | None,
            save: Path | None, json: bool) -> None:
    """With DIR: the review job answers; the requirement files (or the what-if) are written."""
    from planner.jobs.review import review
    from planner.planning import no_model_reason
    from planner.reports.tables import json_text

    if save is not None:
        from planner.reports.whatif import check_save_path

        paths = check_save_path(save, directory)
    # options equal to the goal ask the review's own question; the others make a what-if
    reviewed = review(directory, eps_target=eps_target, distance=distance, qubits=qubits)
    answers, asked = reviewed.answers, reviewed.what_if
    if answers.requirements is None:
        if json:
            typer.echo(json_text({"requirements": None, "note": no_model_reason(answers.fits)}))
        else:
            stdout_console().print(no_model_reason(answers.fits))
        return
    question = " ".join(f"--{'target' if k == 'eps_target' else k} {v:g}" for k, v in asked.items())
    _write(directory, answers, asked, question, paths if save is not None else None,
           stderr_console(quiet=json))
    _render(directory, answers, asked, question, json)


def _write(directory: Path, answers: Answers, asked: dict[str, Any], question: str,
           paths: tuple[Path, Path] | None, chatter: Console) -> None:
    from planner.reports.files import lambda_today_model, write_requirements
    from planner.reports.whatif import default_name, write_what_if

    if paths is not None:
        written = write_what_if(answers.requirements, *paths, question=question,
                                lambda_today_model=lambda_today_model(answers), uncertainty=answers.uncertainty)
        chatter.print(f"wrote {', '.join(str(p) for p in written)}", markup=False, highlight=False)
    if not asked:
        written = write_requirements(answers.requirements, directory, uncertainty=answers.uncertainty,
                                     lambda_today_model=lambda_today_model(answers))
        chatter.print(f"wrote {', '.join(p.name for p in written)} under {directory}", markup=False,
                      highlight=False)
    elif paths is None:
        chatter.print(f"what-if ({question}): printed only, {directory}'s report files still answer "
                      f"the goal; to keep it: --save {directory / default_name(asked)}",
                      markup=False, highlight=False)


def _render(directory: Path, answers: Answers, asked: dict[str, Any], question: str, json: bool) -> None:
    from planner.reports.tables import json_text, render_requirements

    if json:
        doc = answers.requirements.to_json()
        doc["confidence"] = answers.fits.to_json()["confidence"]
        doc["what_if"] = bool(asked)
        typer.echo(json_text(doc))
        return
    console = stdout_console()
    if asked:
        console.print(f"What-if: {question} (not the goal of {directory}/target.toml).", markup=False,
                      highlight=False)
    render_requirements(answers.requirements, console)
