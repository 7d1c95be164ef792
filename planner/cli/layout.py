"""`planner layout TARGET --distance D`: each qubit's coordinates, role, neighbours and the values
in force (its own from the target's per-qubit tables, else the component values)."""

from __future__ import annotations

import csv
import io
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.table import Table

from planner.cli._common import one_line_errors, plain, stdout_console
from planner.cli.options import JsonOpt


def register(app: typer.Typer) -> None:
    app.command("layout", no_args_is_help=True,
                help="Print the qubit layout of the target's code at a distance: coordinates (the keys "
                "of device.qubits and device.qubit_table), role (data / measure X / measure Z), "
                "neighbours and the values in force. --csv prints a table to paste as a qubit_table "
                "(--pairs: a pair_table).")(layout_command)


_VALUES = ("gate_1q", "readout", "reset", "t1_us", "t2_us", "idle_excess", "idle_measure_excess")


@one_line_errors
def layout_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML).")],
    distance: Annotated[int, typer.Option("--distance", "-d", metavar="D",
                                          help="Code distance: an odd integer >= 3.")],
    as_csv: Annotated[bool, typer.Option("--csv", help="Print CSV (a qubit_table; with --pairs a "
                                         "pair_table) instead of a table.", rich_help_panel="Output")] = False,
    pairs: Annotated[bool, typer.Option("--pairs", help="One row per coupled pair with its gate_2q.",
                                        rich_help_panel="Output")] = False,
    json: JsonOpt = False,
) -> None:
    from planner.circuits import layout_rows
    from planner.config import load_target
    from planner.noise import NoiseModel

    spec = load_target(target)
    model = NoiseModel.from_target(spec)
    rows = layout_rows(model, code=spec.sweep.code, distance=distance)
    pair_rows = _pair_rows(rows)
    if json:
        from planner.reports.tables import json_text

        typer.echo(json_text({"code": spec.sweep.code, "distance": distance, "qubits": rows, "pairs": pair_rows}))
    elif as_csv:
        typer.echo(_csv(pair_rows if pairs else rows, pairs=pairs), nl=False)
    else:
        stdout_console().print(_table(pair_rows if pairs else rows, pairs=pairs, title=(
            f"{spec.sweep.code} code, d={distance}: {len(rows)} qubits of {plain(spec.device.name)} "
            "(* = the qubit's own values)")))


def _pair_rows(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    out = []
    for r in rows:
        for n, p in r["gate_2q"].items():
            x2, y2 = (float(v) for v in n.split(","))
            if (r["x"], r["y"]) < (x2, y2):
                out.append({"x1": r["x"], "y1": r["y"], "x2": x2, "y2": y2, "gate_2q": p})
    return out


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


def _csv(rows: list[dict[str, Any]], *, pairs: bool) -> str:
    cols = ["x1", "y1", "x2", "y2", "gate_2q"] if pairs else ["x", "y", "index", "role", "neighbours", *_VALUES]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for r in rows:
        # full precision (repr), so a table pasted back gives exactly these values
        w.writerow([" ".join(r[c]) if c == "neighbours" else "" if r[c] is None else repr(r[c]) if
                    isinstance(r[c], float) else str(r[c]) for c in cols])
    return buf.getvalue()


def _table(rows: list[dict[str, Any]], *, pairs: bool, title: str) -> Table:
    table = Table(title=title)
    if pairs:
        for c in ("qubit", "qubit", "gate_2q"):
            table.add_column(c, justify="right")
        for r in rows:
            table.add_row(f"{r['x1']:g},{r['y1']:g}", f"{r['x2']:g},{r['y2']:g}", _cell(r["gate_2q"]))
        return table
    for c in ("qubit", "index", "role", "neighbours", *_VALUES):
        table.add_column(c, justify="left" if c in ("role", "neighbours") else "right")
    for r in rows:
        table.add_row(r["key"] + ("*" if r["own"] else ""), str(r["index"]), r["role"], " ".join(r["neighbours"]),
                      *(_cell(r[c]) for c in _VALUES))
    return table
