"""Reading and validating a target file (TOML) into frozen objects.

A target file describes one device (its error budget today), the goal, the sweep grid, and
optionally the roadmap (improvement rates) and the relative cost of improving each component.
Every error names the file, the key path and what is allowed; an unknown key suggests the
nearest valid one. This module knows nothing about stim.

>>> t = parse_target(EXAMPLE_TOML, source="example.toml")
>>> t.device.errors.gate_2q, t.sweep.distances
(0.005, (3, 5))
"""

from __future__ import annotations

import datetime as _dt
import difflib
import hashlib
import json
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from planner.errors import InputError

#: The named hardware components. Every answer planner gives is stated as a scale factor on
#: these (1 = today, 0.5 = half today's error, 0 = perfect).
COMPONENTS: tuple[str, ...] = ("gate_1q", "gate_2q", "readout", "reset", "idle", "idle_measure")

#: Largest meaningful probability per component: the point where the channel is fully mixing
#: (DEPOLARIZE1 3/4, DEPOLARIZE2 15/16, a classical flip 1/2).
MAX_PROBABILITY: dict[str, float] = {
    "gate_1q": 0.75,
    "gate_2q": 15 / 16,
    "readout": 0.5,
    "reset": 0.5,
    "idle": 0.75,
    "idle_measure": 0.75,
}

EXAMPLE_TOML = """
[device]
name = "example"
native_2q = "cz"
[device.errors]
gate_1q = 0.001
gate_2q = 0.005
readout = 0.01
reset = 0.002
[device.coherence]
t1_us = 50.0
t2_us = 40.0
[device.durations]
gate_1q_ns = 25
gate_2q_ns = 40
measure_ns = 500
reset_ns = 200
[goal]
logical_error_per_cycle = 1e-6
max_qubits = 1000
[sweep]
distances = [3, 5]
joint_scales = [0.5, 1.0]
"""


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", strict=False)


Probability = Annotated[float, Field(ge=0.0, le=1.0)]
Positive = Annotated[float, Field(gt=0.0)]


class Preset(_Frozen):
    """A published noise model instead of a measured budget (for comparison with the literature).

    ``sd6``: uniform depolarizing at p on every operation; ``si1000``: the superconducting-inspired
    model of Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021), CZ-native.
    """

    model: Literal["sd6", "si1000"]
    p: Annotated[float, Field(gt=0.0, le=0.1)]


class Errors(_Frozen):
    """Error probabilities per operation. Gate errors are total Pauli error probabilities, or
    average gate infidelities from randomized benchmarking (``*_infidelity``, converted with
    r = p * D / (D + 1))."""

    gate_1q: Probability | None = None
    gate_2q: Probability | None = None
    gate_1q_infidelity: Probability | None = None
    gate_2q_infidelity: Probability | None = None
    readout: Probability = 0.0
    reset: Probability = 0.0
    idle_excess: Probability = 0.0
    idle_measure_excess: Probability = 0.0


class Coherence(_Frozen):
    t1_us: Positive
    t2_us: Positive


class Durations(_Frozen):
    gate_1q_ns: Annotated[float, Field(ge=0.0)]
    gate_2q_ns: Annotated[float, Field(ge=0.0)]
    measure_ns: Annotated[float, Field(ge=0.0)]
    reset_ns: Annotated[float, Field(ge=0.0)]


class Device(_Frozen):
    name: str
    native_2q: Literal["cz", "cx"] = "cz"
    preset: Preset | None = None
    errors: Errors = Errors()
    coherence: Coherence | None = None
    durations: Durations | None = None


class Goal(_Frozen):
    logical_error_per_cycle: Annotated[float, Field(gt=0.0, lt=0.5)]
    max_qubits: Annotated[int, Field(ge=5)] = 10_000


class Sweep(_Frozen):
    code: Literal["surface", "repetition"] = "surface"
    distances: tuple[int, ...]
    bases: tuple[Literal["z", "x"], ...] = ("z", "x")
    rounds: Annotated[int, Field(ge=1)] | None = None
    joint_scales: tuple[Positive, ...] = (1.0,)
    component_scales: tuple[Positive, ...] = ()
    components: tuple[Literal[COMPONENTS], ...] | None = None  # type: ignore[valid-type]
    decoder: Literal["pymatching", "pymatching-correlated"] = "pymatching"

    @field_validator("distances")
    @classmethod
    def _odd_distances(cls, v: tuple[int, ...]) -> tuple[int, ...]:
        if not v:
            raise ValueError("needs at least one distance")
        for d in v:
            if d < 3 or d % 2 == 0:
                raise ValueError(f"distance {d} is not allowed: distances are odd integers >= 3")
        return tuple(sorted(set(v)))

    @field_validator("bases")
    @classmethod
    def _bases(cls, v: tuple[str, ...]) -> tuple[str, ...]:
        if not v:
            raise ValueError("needs at least one basis ('z' or 'x')")
        return tuple(dict.fromkeys(v))

    @field_validator("joint_scales", "component_scales")
    @classmethod
    def _sorted_scales(cls, v: tuple[float, ...]) -> tuple[float, ...]:
        return tuple(sorted(set(v)))


class Rate(_Frozen):
    """Expected improvement of one component: the fraction of its error removed per year, or
    the time for its error to halve. ``spread`` is the one-sigma uncertainty of ``per_year``
    (or of ``halving_years``)."""

    per_year: Annotated[float, Field(ge=0.0, lt=1.0)] | None = None
    halving_years: Positive | None = None
    spread: Annotated[float, Field(ge=0.0)] = 0.0


class Roadmap(_Frozen):
    start: _dt.date
    horizon_years: Annotated[float, Field(gt=0.0, le=50.0)] = 15.0
    step: Literal["quarter", "year"] = "quarter"
    rates: dict[Literal[COMPONENTS], Rate] = {}  # type: ignore[valid-type]
    milestones: tuple[Positive, ...] = (2.0, 4.0)
    #: T1 and T2 both grow by this fraction per year (0.2 = +20%/yr); it lowers the twirled part
    #: of the idle and idle_measure errors, on top of their own rates
    coherence_growth_per_year: Annotated[float, Field(ge=0.0, le=10.0)] = 0.0
    coherence_growth_spread: Annotated[float, Field(ge=0.0)] = 0.0


class Target(_Frozen):
    device: Device
    goal: Goal
    sweep: Sweep
    costs: dict[Literal[COMPONENTS], Annotated[float, Field(gt=0.0)]] = {}  # type: ignore[valid-type]
    roadmap: Roadmap | None = None

    #: where the target was read from and a hash of its bytes (set by the loader)
    source: str = Field(default="<memory>", exclude=True)
    sha256: str = Field(default="", exclude=True)

    @property
    def name(self) -> str:
        return Path(self.source).stem if self.source != "<memory>" else self.device.name

    @property
    def components(self) -> tuple[str, ...]:
        """Components with their own scale axis in the sweep (all by default)."""
        return tuple(self.sweep.components) if self.sweep.components else COMPONENTS

    @property
    def sampling_sha256(self) -> str:
        """Hash of what decides the samples (the device and the sweep sections). Editing the goal,
        the costs or the roadmap leaves it unchanged, so existing samples stay usable."""
        doc = self.model_dump(include={"device", "sweep"}, mode="json")
        return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()

    def cost(self, component: str) -> float:
        return float(self.costs.get(component, 1.0))


# ---------------------------------------------------------------------------------------------
# loading


def load_target(path: str | Path) -> Target:
    """Read and validate a target file. Raises :class:`InputError` naming file and field."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such target file") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a directory, expected a target .toml file") from None
    except PermissionError:
        raise InputError(f"{path}: cannot be read (permission denied)") from None
    return parse_target(raw, source=str(path))


def parse_target(text: str | bytes, *, source: str = "<memory>") -> Target:
    """Validate target-file text. ``source`` is used in error messages."""
    data = text if isinstance(text, bytes) else text.encode()
    try:
        doc = tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"{source}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{source}: not valid TOML: {exc}") from None
    try:
        target = Target.model_validate(doc)
    except ValidationError as exc:
        raise InputError(_describe(exc, doc, source)) from None
    target = target.model_copy(update={"source": source, "sha256": hashlib.sha256(data).hexdigest()})
    _check_consistency(target, source)
    return target


def _check_consistency(t: Target, source: str) -> None:
    d = t.device

    def bad(path: str, msg: str) -> InputError:
        return InputError(f"{source}: {path}: {msg}")

    if d.preset is None:
        e = d.errors
        for comp in ("gate_1q", "gate_2q"):
            direct, rb = getattr(e, comp), getattr(e, f"{comp}_infidelity")
            if direct is None and rb is None:
                raise bad(f"device.errors.{comp}", f"missing: give {comp} (Pauli error probability) "
                          f"or {comp}_infidelity (average gate infidelity from RB)")
            if direct is not None and rb is not None:
                raise bad(f"device.errors.{comp}", f"give either {comp} or {comp}_infidelity, not both")
        for key, limit in (("gate_1q", 0.75), ("gate_2q", 15 / 16), ("readout", 0.5), ("reset", 0.5)):
            v = getattr(e, key)
            if v is not None and v > limit:
                raise bad(f"device.errors.{key}", f"{v} is too large: allowed 0 <= p <= {limit:g}")
        for key, limit in (("gate_1q_infidelity", 0.5), ("gate_2q_infidelity", 0.75),
                           ("idle_excess", 0.75), ("idle_measure_excess", 0.75)):
            v = getattr(e, key)
            if v is not None and v > limit:
                raise bad(f"device.errors.{key}", f"{v} is too large: allowed 0 <= value <= {limit:g}")
        if d.coherence is None:
            raise bad("device.coherence", "missing section: give t1_us and t2_us (or a device.preset)")
        if d.durations is None:
            raise bad("device.durations", "missing section: give gate_1q_ns, gate_2q_ns, measure_ns, "
                      "reset_ns (or a device.preset)")
        c = d.coherence
        if c.t2_us > 2 * c.t1_us * (1 + 1e-12):
            raise bad("device.coherence.t2_us", f"T2 = {c.t2_us} us exceeds 2*T1 = {2 * c.t1_us} us, "
                      "which no physical qubit allows (T2 <= 2*T1)")
    else:
        if d.preset.model == "si1000" and d.native_2q != "cz":
            raise bad("device.native_2q", "the si1000 preset is CZ-native: set native_2q = \"cz\"")
        for section in ("coherence", "durations"):
            if getattr(d, section) is not None:
                raise bad(f"device.{section}", "not used with device.preset: remove it or the preset")
    if t.roadmap is not None:
        for comp, rate in t.roadmap.rates.items():
            if (rate.per_year is None) == (rate.halving_years is None):
                raise bad(f"roadmap.rates.{comp}", "give exactly one of per_year (fraction of the "
                          "error removed per year, 0 <= f < 1) or halving_years (> 0)")
    if 2 * min(t.sweep.distances) ** 2 - 1 > t.goal.max_qubits and t.sweep.code == "surface":
        raise bad("goal.max_qubits", f"{t.goal.max_qubits} is smaller than the smallest swept code "
                  f"(d={min(t.sweep.distances)} needs {2 * min(t.sweep.distances) ** 2 - 1} qubits)")


# ---------------------------------------------------------------------------------------------
# error messages

_SECTION_MODELS: dict[str, type[BaseModel]] = {
    "": Target, "device": Device, "device.errors": Errors, "device.coherence": Coherence,
    "device.durations": Durations, "device.preset": Preset, "goal": Goal, "sweep": Sweep,
    "roadmap": Roadmap,
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


def _describe(exc: ValidationError, doc: dict[str, Any], source: str) -> str:
    errors = exc.errors()
    # a typo in a key name explains the rest (a "missing" twin, usually): report it first
    err = next((e for e in errors if e["type"] == "extra_forbidden"), errors[0])
    loc = [str(p) for p in err["loc"]]
    # pydantic adds the union/literal branch name to locations ("int", "literal['z','x']", ...)
    loc = [p for p in loc if not p.startswith(("literal[", "function-", "constrained-"))
           and p not in ("int", "float", "str", "bool", "none", "date")]
    kind = err["type"]
    path = ".".join(loc)
    if kind == "extra_forbidden":
        section, key = ".".join(loc[:-1]), loc[-1]
        valid = _valid_keys(section)
        near = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
        hint = f"; did you mean '{near[0]}'?" if near else ""
        where = f"[{section}]" if section else "the top level"
        return f"{source}: {path}: unknown key in {where}{hint} (valid keys: {', '.join(valid)})"
    if kind == "missing":
        return f"{source}: {path}: missing (required)"
    got = _lookup(doc, err["loc"])
    got_txt = f" (got {got!r})" if got is not _MISSING else ""
    msg = err["msg"]
    if kind in ("literal_error", "enum"):
        msg = msg.replace("Input should be", "must be")
    elif kind.startswith(("greater", "less")):
        msg = msg.replace("Input should be", "must be")
    elif kind.endswith("_type") or kind.endswith("_parsing"):
        msg = msg.replace("Input should be", "must be")
    elif kind == "value_error":
        msg = msg.removeprefix("Value error, ")
    return f"{source}: {path}: {msg}{got_txt}"


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

