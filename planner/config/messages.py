"""Error messages for a target file that fails the schema: the file, the key path, what was
given and what is allowed; an unknown key suggests the nearest valid one."""

from __future__ import annotations

import datetime as _dt
import difflib
from typing import Any

from pydantic import BaseModel, ValidationError

from planner.config.leakage import Leakage
from planner.config.limits import COMPONENTS
from planner.config.schema import (
    Coherence,
    Device,
    Durations,
    Errors,
    Goal,
    Preset,
    Rate,
    Roadmap,
    Sweep,
    Target,
)

# ---------------------------------------------------------------------------------------------
# error messages

_SECTION_MODELS: dict[str, type[BaseModel]] = {
    "": Target, "device": Device, "device.errors": Errors, "device.coherence": Coherence,
    "device.durations": Durations, "device.preset": Preset, "goal": Goal, "sweep": Sweep,
    "roadmap": Roadmap, "device.leakage": Leakage,
}


def _valid_keys(section: str) -> list[str]:
    if section.startswith("roadmap.rates."):
        return list(Rate.model_fields)
    if section in ("costs", "roadmap.rates"):
        return list(COMPONENTS)
    model = _SECTION_MODELS.get(section)
    if model is None:
        return []
    return [k for k, f in model.model_fields.items() if not f.exclude]


#: location parts pydantic adds for a union or literal branch ("int", "literal['z','x']", ...)
_BRANCH_PREFIXES = ("literal[", "function-", "constrained-")
_BRANCH_NAMES = ("int", "float", "str", "bool", "none", "date")


def _location(err: Any) -> tuple[list[str], str]:
    """The key path of one pydantic error without branch names, and its kind (a key of a table
    keyed by component, ``[costs]`` or ``[roadmap.rates]``, that is not a component is an
    unknown key)."""
    loc = [str(p) for p in err["loc"]]
    loc = [p for p in loc if not p.startswith(_BRANCH_PREFIXES) and p not in _BRANCH_NAMES]
    if loc and loc[-1] == "[key]":
        return loc[:-1], "extra_forbidden"
    return loc, err["type"]


def _unknown_key(loc: list[str]) -> str:
    section, key = ".".join(loc[:-1]), loc[-1]
    valid = _valid_keys(section)
    near = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
    hint = f"; did you mean '{near[0]}'?" if near else ""
    where = f"[{section}]" if section else "the top level"
    return f"unknown key in {where}{hint} (valid keys: {', '.join(valid)})"


def describe_validation_error(exc: ValidationError, doc: dict[str, Any], source: str) -> str:
    """One line for the first problem pydantic found: ``source: key.path: what (got ...)``."""
    errors = exc.errors()
    # a typo in a key name explains the rest (a "missing" twin, usually): report it first
    err = next((e for e in errors if e["type"] == "extra_forbidden" or e["loc"][-1:] == ("[key]",)),
               errors[0])
    loc, kind = _location(err)
    # a list element as key[i] (pydantic gives the index as one more path part)
    path = "".join(p if not i else (f"[{p}]" if p.isdigit() else f".{p}") for i, p in enumerate(loc))
    if kind == "extra_forbidden":
        return f"{source}: {path}: {_unknown_key(loc)}"
    if kind == "missing":
        return f"{source}: {path}: missing (required)"
    got = _lookup(doc, err["loc"])
    got_txt = f" (got {_short_repr(got)})" if got is not _MISSING else ""
    msg = err["msg"].replace("Input should be", "must be")
    if kind == "value_error":
        msg = msg.removeprefix("Value error, ")
    return f"{source}: {path}: {msg}{got_txt}"


def _short_repr(value: Any, limit: int = 60) -> str:
    """The offending value as TOML-ish text, cut to ``limit`` characters (a huge list or a long
    string is named, not echoed)."""
    if isinstance(value, _dt.date | _dt.datetime | _dt.time):
        return value.isoformat()
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


_MISSING = object()


def _lookup(doc: Any, loc: tuple[Any, ...]) -> Any:
    cur = doc
    for p in loc:
        if isinstance(cur, dict) and p in cur:
            cur = cur[p]
        elif isinstance(cur, list | tuple) and isinstance(p, int) and p < len(cur):
            cur = cur[p]
        else:
            return _MISSING if cur is doc else cur
    return cur

