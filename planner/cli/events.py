"""`planner events`: invented measured data: detection events and observable flips sampled from
a target's model with planner's own circuits (a hidden "true" device playing the experiment)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, stderr_console


def register(app: typer.Typer) -> None:
    app.command("events", no_args_is_help=True,
                help="Sample detection events and observable flips from a target's circuit and write them "
                     "in a stim result format (observable flips to the sibling file <stem>.obs<suffix>).")(
        events_command)


@one_line_errors
def events_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML): the device that plays the experiment.")],
    distance: Annotated[int, typer.Option("--distance", "-d", help="Code distance (odd, >= 3).")],
    rounds: Annotated[int, typer.Option("--rounds", "-r", help="Rounds of stabilizer measurement.")],
    shots: Annotated[int, typer.Option("--shots", help="Shots to sample.")],
    out: Annotated[Path, typer.Option("--out", help="File of detection events to write.")],
    basis: Annotated[str, typer.Option("--basis", metavar="z|x", help="Logical basis.")] = "z",
    fmt: Annotated[str, typer.Option("--format", help="stim result format: 01, b8, r8, ptb64, dets.")] = "b8",
    seed: Annotated[int | None, typer.Option("--seed", help="Seed of stim's sampler (default: random).")] = None,
    inject: Annotated[list[str] | None, typer.Option(
        "--inject", metavar="X,Y=P", help="Extra depolarizing P on the qubit at X,Y in every layer (repeatable): "
        "a bad qubit the target file does not state.")] = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No chatter on stderr.")] = False,
) -> None:
    from planner.config import load_target
    from planner.errors import InputError
    from planner.jobs.calibrate import parse_qubit, sample_events

    bad = []
    for item in inject or []:
        where, sep, p = item.partition("=")
        try:
            bad.append((parse_qubit(where), float(p)))
        except ValueError:
            raise InputError(f"{item!r} is not X,Y=P (e.g. 3,3=0.005)", field="inject") from None
        if not sep:
            raise InputError(f"{item!r} is not X,Y=P (e.g. 3,3=0.005)", field="inject")
    spec = load_target(target)
    written = sample_events(spec, distance=distance, rounds=rounds, basis=basis, shots=shots, out=out,
                            fmt=fmt, seed=seed, inject=bad)
    stderr_console(quiet=quiet).print(f"wrote {shots} shots: {', '.join(str(p) for p in written)}")
