"""`planner circuit`: print the noisy stim circuit the sweep samples for one grid point."""

from __future__ import annotations

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
    from planner.config import load_target
    from planner.target_circuit import build_circuit

    spec = load_target(target)
    d = _parse_int(distance, field="distance", allowed="an odd integer >= 3", missing_ok=False)
    r = _parse_int(rounds, field="rounds", allowed="an integer >= 1", missing_ok=True)
    circuit = build_circuit(spec, distance=d, basis=basis, rounds=r, scales=parse_scales(scale or []))
    typer.echo(str(circuit))


def _parse_int(text: str | None, *, field: str, allowed: str, missing_ok: bool) -> int | None:
    if text is None:
        if missing_ok:
            return None
        raise InputError(f"missing: give {allowed}", field=field)
    try:
        return int(text.strip())
    except ValueError:
        raise InputError(f"{text!r} is not {allowed}", field=field) from None


def parse_scales(items: list[str]) -> dict[str, float]:
    """``["gate_2q=0.5", ...]`` -> ``{"gate_2q": 0.5}``; raises InputError naming ``scales``
    (the command line says ``--scale``).

    >>> parse_scales(["gate_2q=0.5", "readout = 2"])
    {'gate_2q': 0.5, 'readout': 2.0}
    """
    from planner.target_circuit import check_scales

    out: dict[str, float] = {}
    for item in items:
        name, sep, value = item.partition("=")
        name, value = name.strip(), value.strip()
        if not sep or not name or not value:
            raise InputError(f"{item!r} is not COMPONENT=FACTOR (e.g. gate_2q=0.5)", field="scales")
        try:
            factor = float(value)
        except ValueError:
            raise InputError(f"{item!r}: factor {value!r} is not a number", field="scales") from None
        if name in out:
            raise InputError(f"{name} is given twice; give each component once", field="scales")
        out[name] = factor
    return check_scales(out)
