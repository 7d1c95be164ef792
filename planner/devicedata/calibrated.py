"""The calibrated target file: the user's target text with each fitted excess added to its key
under ``[device.errors]`` (comments and every other line kept), checked by parsing it back.

Units: a component's excess is fitted as the probability placed in the circuit; a target that
gives a gate as an average infidelity (``gate_2q_infidelity``) gets the excess converted to
infidelity (r = p D / (D + 1), Nielsen, Phys. Lett. A 303, 249 (2002)).
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Mapping

from planner.config import Target, parse_target
from planner.devicedata.fit import EXCESS_FIELD
from planner.errors import InputError

__all__ = ["TargetKey", "calibrated_text", "target_key"]


@dataclasses.dataclass(frozen=True)
class TargetKey:
    """Where a component's excess goes in the target file: ``key`` under [device.errors], its
    value ``today``, and ``factor`` (target units per probability placed in the circuit)."""

    component: str
    key: str
    today: float
    factor: float


def target_key(target: Target, component: str) -> TargetKey:
    """The key a component's excess is added to.

    >>> from planner.config import EXAMPLE_TOML
    >>> target_key(parse_target(EXAMPLE_TOML), "idle_measure")
    TargetKey(component='idle_measure', key='idle_measure_excess', today=0.0, factor=1.0)
    """
    if target.device.preset is not None:
        raise InputError("a preset has no error budget to calibrate: give [device.errors] values",
                         field="device.preset", source=target.source)
    e = target.device.errors
    key = EXCESS_FIELD[component]
    if component in ("gate_1q", "gate_2q") and getattr(e, key) is None:
        d = 2 if component == "gate_1q" else 4
        return TargetKey(component, f"{key}_infidelity", float(getattr(e, f"{key}_infidelity") or 0.0),
                         d / (d + 1))
    return TargetKey(component, key, float(getattr(e, key) or 0.0), 1.0)


_HEADER = re.compile(r"^\s*\[\s*device\s*\.\s*errors\s*\]\s*(#.*)?$")
_TABLE = re.compile(r"^\s*\[")


def calibrated_text(text: str, target: Target, excess: Mapping[str, float], *, note: str) -> str:
    """``text`` (the target file) with each component's ``excess`` (probability in the circuit)
    added to its key; ``note`` heads the file as a comment. Raises InputError when the file
    has no ``[device.errors]`` table to edit."""
    lines = text.splitlines()
    start = next((k for k, line in enumerate(lines) if _HEADER.match(line)), None)
    if start is None:
        raise InputError("no [device.errors] table to write the fitted excess into",
                         source=target.source)
    end = next((k for k in range(start + 1, len(lines)) if _TABLE.match(lines[k])), len(lines))
    wanted: dict[str, float] = {}
    for comp, x in excess.items():
        tk = target_key(target, comp)
        if x > 0:
            value = tk.today + x * tk.factor
            wanted[tk.key] = value
            line = f"{tk.key} = {value:.6g}  # {tk.today:g} + fitted excess {x * tk.factor:.3g} (planner calibrate)"
            pattern = re.compile(rf"^\s*{re.escape(tk.key)}\s*=")
            at = next((k for k in range(start + 1, end) if pattern.match(lines[k])), None)
            if at is None:
                lines.insert(start + 1, line)
                end += 1
            else:
                lines[at] = line
    head = [f"# {x}" for x in note.splitlines()]
    out = "\n".join(head + lines) + "\n"
    back = parse_target(out, source="calibrated.toml")
    for key, value in wanted.items():
        if abs(float(getattr(back.device.errors, key)) - float(f"{value:.6g}")) > 1e-12:
            raise InputError(f"could not write {key} into [device.errors]", source=target.source)
    return out
