"""`planner status`: per task shots, errors, interval width, and what is left of the budget."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Any

import typer

from planner.cli._common import one_line_errors, plain, stdout_console
from planner.cli.options import JsonOpt, check_precision


def register(app: typer.Typer) -> None:
    app.command("status", no_args_is_help=True,
                help="Per task: shots, errors, relative width of the 95% interval of the logical "
                "error per shot, done or left against the budget recorded in DIR, and an "
                "estimate of the CPU time left.")(status_command)


def _duration(seconds: float | None) -> str:
    """Human-readable duration: '45 s', '12 min', '3.5 h', '2.1 d'.

    >>> _duration(30), _duration(600), _duration(12600), _duration(None)
    ('30 s', '10 min', '3.5 h', '?')
    """
    if seconds is None or not math.isfinite(seconds):
        return "?"
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    if seconds < 172800:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.1f} d"


def _percent(x: float | None, digits: int) -> str:
    """A fraction as a percentage; '-' for missing or not finite (no errors yet: no width).

    >>> _percent(0.1234, 1), _percent(float("inf"), 0), _percent(None, 0), _percent(-1e-9, 1)
    ('12.3%', '-', '-', '0.0%')
    """
    if x is None or not math.isfinite(x):
        return "-"
    text = f"{x + 0.0:.{digits}%}"
    return text[1:] if text.startswith("-") and float(text[1:-1]) == 0 else text  # never "-0%"


def _label(meta: Any) -> str:
    """The code, then the task as the precision messages name it.

    >>> _label({"code": "surface", "d": 5, "basis": "z", "axis": "gate_1q", "factor": 0.3})
    'surface gate_1q ×0.3 d=5 z'
    """
    from planner.precision_answers import task_label

    if not isinstance(meta, dict):
        return str(meta)
    return f"{meta.get('code', '?')} {task_label(meta)}"


def _sort_key(meta: Any) -> tuple:
    if not isinstance(meta, dict):
        return ("", 0.0, 0, "")

    def number(key: str) -> float:
        try:
            return float(meta.get(key, 0))
        except (TypeError, ValueError):
            return math.inf  # a hand-edited value sorts last instead of crashing the listing

    return (str(meta.get("axis", "")), number("factor"), number("d"), str(meta.get("basis", "")))


@one_line_errors
def status_command(
    directory: Annotated[Path, typer.Argument(metavar="DIR", help="Out directory of a sweep.")],
    as_json: JsonOpt = False,
    precision: Annotated[float | None, typer.Option(
        "--precision", metavar="REL", help="Also show, per task, the interval width against this "
        "precision target and the estimated CPU time to reach it (see `planner sweep --precision`).",
        rich_help_panel="Precision")] = None,
) -> None:
    from planner.errors import InputError
    from planner.fits import CONFIDENCE, LIKELIHOOD_FACTOR
    from planner.manifest import read_manifest
    from planner.sampling import store_status
    from planner.store import SampleStore

    if not directory.is_dir():
        raise InputError(f"{directory}: no such out directory")
    store = SampleStore(directory)
    if not store.shard_files():
        raise InputError(f"{directory}: holds no samples ({store.samples_dir} has no .csv shards); "
                         "run 'planner sweep' first")
    check_precision(precision)
    manifest = read_manifest(directory)
    targeted: dict[str, Any] = {}
    if precision is not None:
        from planner.config import load_target
        from planner.precision import status_precision

        spec = load_target(directory / "target.toml")
        targeted = {p.strong_id: p for p in status_precision(store, spec, precision)}
    rows = sorted(store_status(store, manifest=manifest, likelihood_factor=LIKELIHOOD_FACTOR),
                  key=lambda r: _sort_key(r.json_metadata))
    known = [r.cpu_seconds_left for r in rows if r.done is False]
    cpu_left = None if any(c is None for c in known) else sum(c or 0.0 for c in known)
    budget = None
    if manifest is not None and manifest.max_errors is not None:
        budget = {"name": manifest.budget, "max_errors": manifest.max_errors,
                  "max_shots": manifest.max_shots}
    totals = {"tasks": len(rows), "done": sum(1 for r in rows if r.done),
              "shots": sum(r.shots for r in rows), "errors": sum(r.errors for r in rows),
              "cpu_seconds": sum(r.seconds for r in rows), "cpu_seconds_left": cpu_left}

    if as_json:
        doc = {"dir": str(directory), "confidence": CONFIDENCE, "budget": budget,
               "shards": [str(p) for p in store.shard_files()], "totals": totals,
               "tasks": [{"strong_id": r.strong_id, "decoder": r.decoder, "metadata": r.json_metadata,
                          "shots": r.shots, "errors": r.errors, "discards": r.discards,
                          "cpu_seconds": r.seconds,
                          "error_per_shot": {"best": r.rate_best, "low": r.rate_low, "high": r.rate_high},
                          "relative_width": r.relative_width, "done": r.done,
                          "shots_left": r.shots_left, "cpu_seconds_left": r.cpu_seconds_left,
                          **({"precision": targeted[r.strong_id].to_json()} if r.strong_id in targeted else {})}
                         for r in rows]}
        if precision is not None:
            doc["precision"] = precision
        from planner.reports.tables import json_text

        typer.echo(json_text(doc))  # non-finite numbers as null, never NaN/Infinity
        return

    from rich.table import Table

    title = f"{plain(directory)}: {totals['done']}/{totals['tasks']} tasks done"
    if budget is not None:
        title += (f" (budget '{budget['name']}': {budget['max_errors']} errors or "
                  f"{budget['max_shots']:,} shots per task)")
    table = Table(title=title, caption=f"width: relative width of the {CONFIDENCE:.0%} interval "
                  "of the logical error per shot; CPU time from measured seconds per shot")
    for col, justify in (("task", "left"), ("shots", "right"), ("errors", "right"),
                         ("error/shot", "right"), ("width", "right"), ("state", "left"),
                         ("CPU left", "right")):
        table.add_column(col, justify=justify)  # type: ignore[arg-type]
    if precision is not None:
        _precision_table(rows, targeted, precision, directory)
        return
    for r in rows:
        state = "?" if r.done is None else ("done" if r.done else f"~{r.shots_left:,} shots left")
        table.add_row(_label(r.json_metadata), f"{r.shots:,}", f"{r.errors:,}",
                      f"{r.rate_best:.2e}" if r.shots else "-",
                      _percent(r.relative_width, 0),
                      state, "-" if r.done else _duration(r.cpu_seconds_left))
    con = stdout_console()
    con.print(table)
    con.print(f"total: {totals['shots']:,} shots, {totals['errors']:,} errors, "
              f"{_duration(totals['cpu_seconds'])} CPU used, {_duration(cpu_left)} CPU left "
              "(divide by the number of cores)")


def _precision_table(rows: Any, targeted: dict[str, Any], precision: float, directory: Path) -> None:
    from rich.table import Table

    table = Table(title=f"{plain(directory)}: tasks against a precision target of +-{precision:.0%}",
                  caption="width: relative 95% half-width of the task's error rate now, and after the "
                  "plan that brings the tracked answers to the target; CPU: estimated core time of that plan")
    for col in ("task", "shots", "errors", "width now", "planned", "extra shots", "CPU", "state"):
        table.add_column(col, justify="left" if col in ("task", "state") else "right")
    cpu = 0.0
    for r in rows:
        p = targeted.get(r.strong_id)
        if p is None:
            continue
        pct = lambda x: _percent(x, 1)  # noqa: E731
        cpu += p.cpu_seconds_to_target or 0.0
        table.add_row(_label(r.json_metadata), f"{r.shots:,}", f"{r.errors:,}", pct(p.relative_width),
                      pct(p.planned_relative_width), f"{p.extra_shots:,}" if p.extra_shots else "-",
                      _duration(p.cpu_seconds_to_target) if p.extra_shots else "-", p.state)
    con = stdout_console()
    con.print(table)
    con.print(f"to reach +-{precision:.0%}: about {_duration(cpu)} of CPU (divide by the number of cores); "
              f"run `planner sweep TARGET --out {directory} --precision {precision:g}`")
