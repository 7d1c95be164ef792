"""The answers in physical units and in time: one table of what each factor means for the
device, one of the logical error rate in time (today, at the goal, along the roadmap)."""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console

from planner.reports.table import Table

_UNITS = (("mean_seconds", 1.0), ("minutes", 60.0), ("hours", 3600.0), ("days", 86400.0), ("years", 3.156e7))


def duration_text(seconds: float | None) -> str:
    """A duration a person reads.

    >>> duration_text(0.0123), duration_text(90.0), duration_text(2.5e5), duration_text(4e9)
    ('12.3 ms', '1.5 minutes', '2.89 days', '127 years')
    """
    if seconds is None or not math.isfinite(seconds):
        return "beyond any reachable"
    if seconds < 1e-3:
        return f"{seconds * 1e6:.3g} us"
    if seconds < 1:
        return f"{seconds * 1e3:.3g} ms"
    name, size = "s", 1.0
    for unit, s in _UNITS[1:]:
        if seconds >= s:
            name, size = unit, s
    return f"{seconds:.3g} s" if name == "s" else f"{seconds / size:.3g} {name}"


def physical_table(p: Any) -> Table:
    rows = []
    for lever, _comp, f, v in p.rows:
        first, *more = v.text.split("; ")
        rows.append((f"{lever} x{f:.3g}" if f is not None else lever, first))
        rows += [("", part) for part in more]
    return Table(key="physical", title="What the factors mean for the device",
                 headers=("lever (factor)", "in physical units"), rows=rows, left=(0, 1),
                 notes=("Pauli error: the depolarizing probability per gate as placed in the circuit; RB "
                        "infidelity r = p D/(D+1) (D = 2 per qubit); T1/T2: the times giving the factor's "
                        "twirled idle error over today's layer; excess: the part beyond T1/T2. Best values "
                        "of the factors (their intervals are in the table above).",))


def time_table(p: Any) -> Table | None:
    if p.cycle_ns is None:
        return None
    rows = []
    if p.today is not None:
        span = "" if p.today_seconds_interval is None else \
            f" [{duration_text(p.today_seconds_interval[0])}, {duration_text(p.today_seconds_interval[1])}]"
        rows.append((f"today, d = {p.distance}", f"{p.today.per_cycle:.3g}", f"{p.today.per_second:.3g}",
                     duration_text(p.today.mean_seconds_between) + span))
    if p.goal is not None:
        rows.append((f"the goal, d = {p.distance}", f"{p.goal.per_cycle:.3g}", f"{p.goal.per_second:.3g}",
                     duration_text(p.goal.mean_seconds_between)))
    shown = p.roadmap[:: max(1, len(p.roadmap) // 8)] if p.roadmap else ()
    rows += [(f"roadmap {d}", f"{e:.3g}", f"{1 / s:.3g}" if s and math.isfinite(s) else "", duration_text(s))
             for d, e, s in shown]
    return Table(key="time", title=f"Logical errors in time (one cycle = {p.cycle_ns:g} ns)",
                 headers=("when", "eps per cycle", "logical errors per second", "mean time between logical errors"),
                 rows=rows, left=(0, 3),
                 notes=("cycle: the sum of one round's layer durations (each layer as long as its slowest "
                        "operation); per second = -ln(1 - 2 eps) / (2 t_cycle). Model-based: the roadmap rows "
                        "are projections at the roadmap's goal distance.",))


def physical_tables(p: Any) -> list[Table]:
    """The tables for requirements.md and the page (none without physical answers)."""
    if p is None:
        return []
    t = time_table(p)
    return [physical_table(p)] + ([t] if t is not None else [])


def render_physical(p: Any, console: Console) -> None:
    """Terminal form, wrapped to the console: one line per lever, then the time figures (the
    roadmap's series is in requirements.md)."""
    from planner.reports.terminal import say, words

    if p is None:
        return
    levers: dict[str, list[str]] = {}
    for lever, comp, f, v in p.rows:
        if lever == "cheapest mix":
            levers.setdefault(lever, []).append(f"{comp} x{f:.3g}: {v.text}")
        else:
            levers.setdefault(f"{lever} x{f:.3g}" if f is not None else lever, []).append(v.text)
    for head, texts in levers.items():
        say(console, "In physical units,", f"{head}:", *words("; ".join(texts) + "."))
    if p.cycle_ns is None:
        say(console, *words("Time: the target gives no durations, so no cycle time (a preset)."))
        return
    pieces = ["Time:", "one", "cycle", "=", f"{p.cycle_ns:g} ns;"]
    if p.today is not None:
        span = "" if p.today_seconds_interval is None else \
            f" [{duration_text(p.today_seconds_interval[0])}, {duration_text(p.today_seconds_interval[1])}]"
        pieces += [*words(f"today at d = {p.distance} a logical error every"),
                   duration_text(p.today.mean_seconds_between) + span + ";"]
    if p.goal is not None:
        pieces += [*words("at the goal every"), duration_text(p.goal.mean_seconds_between) + "."]
    say(console, *pieces)
