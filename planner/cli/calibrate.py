"""`planner calibrate`: fit the target's model to measured detection events; write the calibrated
target, the comparison tables and plots; name the outliers."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stderr_console, stdout_console
from planner.cli.options import JsonOpt, QuietOpt, WorkersOpt


def register(app: typer.Typer) -> None:
    app.command("calibrate", no_args_is_help=True,
                help="Compare measured detection events with the target's model (exact, from its detector "
                     "error model), fit the excess error per component, write DIR/calibrated.toml and the "
                     "comparison, and name the qubits that differ.")(calibrate_command)


@one_line_errors
def calibrate_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML): the first-principles model.")],
    events: Annotated[Path, typer.Option("--events", help="Detection events (observable flips from the "
                                         "sibling <stem>.obs<suffix> when present).")],
    distance: Annotated[int, typer.Option("--distance", "-d", help="Code distance of the experiment.")],
    rounds: Annotated[int, typer.Option("--rounds", "-r", help="Rounds of the experiment.")],
    basis: Annotated[str, typer.Option("--basis", metavar="z|x", help="Logical basis.")] = "z",
    fmt: Annotated[str, typer.Option("--format", help="stim result format: 01, b8, r8, ptb64, dets.")] = "b8",
    obs: Annotated[Path | None, typer.Option("--obs", help="Observable flips (default: the sibling file).")] = None,
    out: Annotated[Path | None, typer.Option("--out", help="Out directory (default: out/<target>-calibrate).")] = None,
    fit: Annotated[str | None, typer.Option(
        "--fit", metavar="C1,C2", help="Components whose excess is fitted (default gate_1q,gate_2q,readout,"
        "idle_measure; also reset, idle).")] = None,
    threshold: Annotated[float, typer.Option("--threshold", help="Outlier threshold in sigma.")] = 5.0,
    logical: Annotated[Path | None, typer.Option(
        "--logical", help="CSV of measured logical error rates (distance,shots,errors[,rounds][,label]) "
        "to check against the calibrated model.")] = None,
    no_stages: Annotated[bool, typer.Option("--no-stages", help="Do not sample the staged comparison.")] = False,
    workers: WorkersOpt = None,
    json_out: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    from planner.config import load_target
    from planner.devicedata import DEFAULT_COMPONENTS
    from planner.jobs.calibrate import run_calibration
    from planner.reports.calibrate import calibration_tables, write_calibration
    from planner.reports.jsondoc import json_text
    from planner.reports.terminal import print_table

    spec = load_target(target)
    out_dir = out if out is not None else Path("out") / f"{spec.name}-calibrate"
    components = tuple(c.strip() for c in fit.split(",") if c.strip()) if fit else DEFAULT_COMPONENTS
    chatter = stderr_console(quiet=quiet or json_out)
    cal = run_calibration(spec, events=events, distance=distance, rounds=rounds, basis=basis, fmt=fmt, obs=obs,
                          components=components, threshold=threshold, out_dir=out_dir,
                          stage_rule=None if no_stages else _stage_rule(), logical_csv=logical,
                          workers=workers, console=chatter)
    written = write_calibration(cal, out_dir)
    if json_out:
        typer.echo(json_text(cal.to_json()))
        return
    console = stdout_console()
    for table in calibration_tables(cal):
        print_table(console, table)
    say_written(written, out_dir, quiet=quiet)


def _stage_rule():  # noqa: ANN202 - the job's default rule
    from planner.jobs.calibrate import STAGE_RULE

    return STAGE_RULE
