"""`planner circuit`: print the noisy stim circuit the sweep samples for one grid point."""

from __future__ import annotations

import difflib
import math
from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors
from planner.errors import InputError


def register(app: typer.Typer) -> None:
    app.command("circuit", no_args_is_help=True,
                help="Print the noisy stim circuit that the sweep samples (stdout, stim text format)."
                )(circuit_command)


@one_line_errors
def circuit_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML).")],
    distance: Annotated[str | None, typer.Option(
        "--distance", "-d", metavar="D", help="Code distance: an odd integer >= 3.",
        rich_help_panel="Circuit")] = None,
    basis: Annotated[str | None, typer.Option(
        "--basis", metavar="z|x", help="Logical basis (default: the target's first basis; "
        "the repetition code has 'z' only).", rich_help_panel="Circuit")] = None,
    rounds: Annotated[str | None, typer.Option(
        "--rounds", "-r", metavar="R", help="Rounds of stabilizer measurement (default: the "
        "target's sweep.rounds, else the distance).", rich_help_panel="Circuit")] = None,
    scale: Annotated[list[str] | None, typer.Option(
        "--scale", metavar="COMPONENT=FACTOR", help="Scale one component's error (repeatable), "
        "e.g. --scale gate_2q=0.5; 1 is today, 0 is perfect.", rich_help_panel="Noise")] = None,
) -> None:
    from planner.circuits import build_memory_circuit
    from planner.config import distance_problem, load_target, size_problem
    from planner.noise import NoiseModel
    from planner.sweep import bases_for, rounds_for

    spec = load_target(target)
    d = _parse_int(distance, option="--distance", allowed="an odd integer >= 3", missing_ok=False)
    if d is None or (problem := distance_problem(d)) is not None:
        raise InputError(problem if d is not None else f"{distance} is not allowed", field="distance")
    r = _parse_int(rounds, option="--rounds", allowed="an integer >= 1", missing_ok=True)
    if r is None:
        r = rounds_for(spec, d)
    elif r < 1:
        raise InputError(f"--rounds: {rounds} is not allowed: give an integer >= 1")
    problem = size_problem(code=spec.sweep.code, distance=d, rounds=r)
    if problem is not None:
        raise InputError(f"{'--rounds' if rounds is not None else '--distance'}: {problem}")
    allowed_bases = bases_for(spec)
    b = allowed_bases[0] if basis is None else basis.strip().lower()
    if b not in allowed_bases:
        code_txt = f"the {spec.sweep.code} code"
        raise InputError(f"--basis: {basis!r} is not allowed for {code_txt}: allowed "
                         f"{', '.join(repr(x) for x in allowed_bases)}")
    factors = parse_scales(scale or [])
    try:
        model = NoiseModel.from_target(spec).with_scales(factors)
    except ValueError as exc:
        raise InputError(f"--scale: {exc}") from None
    circuit = build_memory_circuit(model, code=spec.sweep.code, distance=d, rounds=r, basis=b)
    typer.echo(str(circuit))


def _parse_int(text: str | None, *, option: str, allowed: str, missing_ok: bool) -> int | None:
    if text is None:
        if missing_ok:
            return None
        raise InputError(f"{option}: missing: give {allowed}")
    try:
        return int(text.strip())
    except ValueError:
        raise InputError(f"{option}: {text!r} is not {allowed}") from None


def parse_scales(items: list[str]) -> dict[str, float]:
    """``["gate_2q=0.5", ...]`` -> ``{"gate_2q": 0.5}``; raises InputError naming ``--scale``.

    >>> parse_scales(["gate_2q=0.5", "readout = 2"])
    {'gate_2q': 0.5, 'readout': 2.0}
    """
    from planner.config import COMPONENTS

    out: dict[str, float] = {}
    for item in items:
        name, sep, value = item.partition("=")
        name, value = name.strip(), value.strip()
        if not sep or not name or not value:
            raise InputError(f"--scale: {item!r} is not COMPONENT=FACTOR (e.g. gate_2q=0.5)")
        if name not in COMPONENTS:
            near = difflib.get_close_matches(name, COMPONENTS, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            raise InputError(f"--scale: unknown component {name!r}{hint} (components: "
                             f"{', '.join(COMPONENTS)})")
        try:
            factor = float(value)
        except ValueError:
            raise InputError(f"--scale: {item!r}: factor {value!r} is not a number") from None
        if not math.isfinite(factor) or factor < 0:
            raise InputError(f"--scale: {item!r}: factor must be a finite number >= 0")
        if name in out:
            raise InputError(f"--scale: {name} is given twice; give each component once")
        out[name] = factor
    return out
