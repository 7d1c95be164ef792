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
import unicodedata
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, Strict, ValidationError, field_validator

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


# ---------------------------------------------------------------------------------------------
# limits: what one machine can build and sample (see the README's "Limits" section)

#: Largest code distance: a distance-101 rotated surface code has 20,401 qubits.
MAX_DISTANCE = 101
#: Most detectors in one memory circuit (2**20). Sampling a circuit holds its detector error model
#: and its matching graph in each worker: about 1.4 kB per detector (measured with stim 1.16 and
#: pymatching 2.4: d = 51 with 301 rounds, 0.78 million detectors, 0.9 GB and 10 s to set up; d = 101
#: with 101 rounds, 1.03 million detectors, 1.4 GB and 30 s). So about 1.5 GB per worker at the limit.
MAX_DETECTORS = 2**20
#: Most distances, and most entries in each scale list, of one sweep.
MAX_DISTANCES = 25
MAX_SCALES = 64
#: Most tasks (scale points x distances x bases) in one sweep: planning builds every circuit
#: up front and the manifest lists every task. A thorough grid has a few hundred.
MAX_TASKS = 4000
#: Largest qubit budget: 100x the largest machines on published roadmaps (about 10**6).
MAX_QUBITS = 10**8
#: Roadmap start dates (the horizon adds up to 50 years on top).
MIN_START = _dt.date(1950, 1, 1)
MAX_START = _dt.date(2200, 12, 31)
#: Longest device name (it is printed in every report title).
MAX_NAME_LENGTH = 200
#: Largest target file: a real one is a few kilobytes.
MAX_TARGET_BYTES = 2**20


def distance_problem(distance: object, *, largest: int = MAX_DISTANCE) -> str | None:
    """Why ``distance`` is not a code distance (an odd integer 3 <= d <= ``largest``), or None:
    the one odd-distance check (target files, circuits, questions).

    >>> distance_problem(5), distance_problem(4)
    (None, '4 is not allowed: distances are odd integers >= 3 (odd 3 <= d <= 101)')
    >>> distance_problem(103)
    '103 is too large: odd distances from 3 to 101 are allowed'
    """
    if isinstance(distance, bool) or not isinstance(distance, int) or distance < 3 or distance % 2 == 0:
        return f"{distance!r} is not allowed: distances are odd integers >= 3 (odd 3 <= d <= {largest})"
    if distance > largest:
        return f"{distance} is too large: odd distances from 3 to {largest} are allowed"
    return None


def coherence_problem(*, t1_us: float, t2_us: float) -> str | None:
    """Why T1 and T2 cannot belong to one physical qubit (T2 <= 2 T1), or None: the one check of
    it (target files and noise models).

    >>> coherence_problem(t1_us=50, t2_us=40), coherence_problem(t1_us=10, t2_us=30)
    (None, 'T2 = 30 us exceeds 2*T1 = 20 us, which no physical qubit allows (T2 <= 2*T1)')
    """
    if t2_us > 2 * t1_us * (1 + 1e-12):
        return f"T2 = {t2_us:g} us exceeds 2*T1 = {2 * t1_us:g} us, which no physical qubit allows (T2 <= 2*T1)"
    return None


def memory_circuit_size(*, code: str, distance: int, rounds: int) -> tuple[int, int]:
    """(qubits, detectors) of a memory experiment, computed without building it: a rotated
    surface code of distance d has d**2 data and d**2 - 1 measure qubits and checks (d**2 - 1)
    detectors per round; a repetition code d data and d - 1 measure qubits, (d - 1) per round,
    plus one last layer from the data readout.

    >>> memory_circuit_size(code="surface", distance=3, rounds=3), memory_circuit_size(code="repetition", distance=3, rounds=1)
    ((17, 24), (5, 4))
    """
    if code == "repetition":
        return 2 * distance - 1, (distance - 1) * (rounds + 1)
    return 2 * distance**2 - 1, (distance**2 - 1) * rounds


def size_problem(*, code: str, distance: int, rounds: int) -> str | None:
    """Why a memory circuit is too large for one machine to build and sample, or None.

    >>> size_problem(code="surface", distance=51, rounds=300) is None
    True
    >>> print(size_problem(code="surface", distance=3, rounds=10**6))
    d=3 with 1000000 rounds has 8,000,000 detectors; at most 1,048,576 are allowed (about 1.5 GB per sampling worker): at d=3 use rounds <= 131072
    """
    if (problem := distance_problem(distance)) is not None:
        return f"distance {problem}"
    _, detectors = memory_circuit_size(code=code, distance=distance, rounds=rounds)
    if detectors <= MAX_DETECTORS:
        return None
    per_round = distance - 1 if code == "repetition" else distance**2 - 1
    most = MAX_DETECTORS // per_round - (1 if code == "repetition" else 0)
    return (f"d={distance} with {rounds} rounds has {detectors:,} detectors; at most {MAX_DETECTORS:,} "
            f"are allowed (about 1.5 GB per sampling worker): at d={distance} use rounds <= {most}")


def _plain_text(value: str) -> str:
    """User text that ends up in terminals and reports: bounded, no control characters."""
    if not value.strip():
        raise ValueError("must not be empty")
    if len(value) > MAX_NAME_LENGTH:
        raise ValueError(f"is {len(value):,} characters long: at most {MAX_NAME_LENGTH} are allowed")
    # control characters (a terminal escape, a newline) and invisible format characters (a
    # right-to-left override) would change what a terminal or a report shows
    bad = next((ch for ch in value if unicodedata.category(ch) in ("Cc", "Cf")), None)
    if bad is not None:
        raise ValueError(f"contains the control character {bad!r}: use printable text only")
    return value


class _Frozen(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", strict=False)


# numbers are TOML numbers: a quoted "4.5e-3" or a boolean is refused, never converted
Number = Annotated[float, Strict(), Field(allow_inf_nan=False)]
Integer = Annotated[int, Strict()]
Probability = Annotated[Number, Field(ge=0.0, le=1.0)]
Positive = Annotated[Number, Field(gt=0.0)]


class Preset(_Frozen):
    """A published noise model instead of a measured budget (for comparison with the literature).

    ``sd6``: uniform depolarizing at p on every operation; ``si1000``: the superconducting-inspired
    model of Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021), CZ-native.
    """

    model: Literal["sd6", "si1000"]
    p: Annotated[Number, Field(gt=0.0, le=0.1)]


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
    gate_1q_ns: Annotated[Number, Field(ge=0.0)]
    gate_2q_ns: Annotated[Number, Field(ge=0.0)]
    measure_ns: Annotated[Number, Field(ge=0.0)]
    reset_ns: Annotated[Number, Field(ge=0.0)]


class Device(_Frozen):
    name: str
    native_2q: Literal["cz", "cx"] = "cz"
    preset: Preset | None = None
    errors: Errors = Errors()
    coherence: Coherence | None = None
    durations: Durations | None = None

    @field_validator("name")
    @classmethod
    def _name(cls, v: str) -> str:
        return _plain_text(v)


class Goal(_Frozen):
    logical_error_per_cycle: Annotated[Number, Field(gt=0.0, lt=0.5)]
    max_qubits: Annotated[Integer, Field(ge=5, le=MAX_QUBITS)] = 10_000


class Sweep(_Frozen):
    code: Literal["surface", "repetition"] = "surface"
    distances: tuple[Integer, ...]
    bases: tuple[Literal["z", "x"], ...] = ("z", "x")
    rounds: Annotated[Integer, Field(ge=1)] | None = None
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
            if (problem := distance_problem(d)) is not None:
                raise ValueError(f"distance {problem}")
        v = tuple(sorted(set(v)))
        if len(v) > MAX_DISTANCES:
            raise ValueError(f"{len(v)} distances: at most {MAX_DISTANCES} are allowed")
        return v

    @field_validator("bases")
    @classmethod
    def _bases(cls, v: tuple[str, ...]) -> tuple[str, ...]:
        if not v:
            raise ValueError("needs at least one basis ('z' or 'x')")
        return tuple(dict.fromkeys(v))

    @field_validator("joint_scales", "component_scales")
    @classmethod
    def _sorted_scales(cls, v: tuple[float, ...]) -> tuple[float, ...]:
        v = tuple(sorted(set(v)))
        if len(v) > MAX_SCALES:
            raise ValueError(f"{len(v):,} scale factors: at most {MAX_SCALES} are allowed")
        return v

    @field_validator("components")
    @classmethod
    def _components(cls, v: tuple[str, ...] | None) -> tuple[str, ...] | None:
        if v is not None and not v:
            raise ValueError("is empty: list the components that get their own scale axis "
                             f"({', '.join(COMPONENTS)}), or leave the key out for all of them")
        return v


class Rate(_Frozen):
    """Expected improvement of one component: the fraction of its error removed per year, or
    the time for its error to halve. ``spread`` is the one-sigma uncertainty of ``per_year``
    (or of ``halving_years``)."""

    per_year: Annotated[Number, Field(ge=0.0, lt=1.0)] | None = None
    halving_years: Positive | None = None
    spread: Annotated[Number, Field(ge=0.0)] = 0.0


class Roadmap(_Frozen):
    start: Annotated[_dt.date, Field(ge=MIN_START, le=MAX_START)]
    horizon_years: Annotated[Number, Field(gt=0.0, le=50.0)] = 15.0
    step: Literal["quarter", "year"] = "quarter"
    rates: dict[Literal[COMPONENTS], Rate] = {}  # type: ignore[valid-type]
    milestones: tuple[Positive, ...] = (2.0, 4.0)
    #: T1 and T2 both grow by this fraction per year (0.2 = +20%/yr); it lowers the twirled part
    #: of the idle and idle_measure errors, on top of their own rates
    coherence_growth_per_year: Annotated[Number, Field(ge=0.0, le=10.0)] = 0.0
    coherence_growth_spread: Annotated[Number, Field(ge=0.0)] = 0.0


class Target(_Frozen):
    device: Device
    goal: Goal
    sweep: Sweep
    costs: dict[Literal[COMPONENTS], Positive] = {}  # type: ignore[valid-type]
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
        with path.open("rb") as f:
            raw = f.read(MAX_TARGET_BYTES + 1)
    except FileNotFoundError:
        raise InputError(f"{path}: no such target file") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a directory, expected a target .toml file") from None
    except PermissionError:
        raise InputError(f"{path}: cannot be read (permission denied)") from None
    if len(raw) > MAX_TARGET_BYTES:
        raise InputError(f"{path}: larger than {MAX_TARGET_BYTES // 2**20} MiB: a target file is a "
                         "few kilobytes of TOML (is this the right file?)")
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
        problem = coherence_problem(t1_us=d.coherence.t1_us, t2_us=d.coherence.t2_us)
        if problem is not None:
            raise bad("device.coherence.t2_us", problem)
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
    sw = t.sweep
    if sw.code == "repetition" and "bases" in sw.model_fields_set and sw.bases != ("z",):
        raise bad("sweep.bases", "the repetition-code memory exists in basis 'z' only: set bases = "
                  "[\"z\"] or leave the key out")
    for d in sw.distances:
        problem = size_problem(code=sw.code, distance=d,
                               rounds=sw.rounds if sw.rounds is not None else d)
        if problem is not None:
            key = "sweep.rounds" if sw.rounds is not None else "sweep.distances"
            raise bad(key, problem + ("" if sw.rounds is not None else " (rounds default to the distance)"))
    num_points = len(set(sw.joint_scales) | {1.0}) + len(t.components) * sum(
        1 for s in sw.component_scales if s != 1.0)
    num_tasks = num_points * len(sw.distances) * (1 if sw.code == "repetition" else len(sw.bases))
    if num_tasks > MAX_TASKS:
        raise bad("sweep", f"the grid has {num_tasks:,} tasks ({num_points} scale points x "
                  f"{len(sw.distances)} distances x bases): at most {MAX_TASKS:,} are allowed; use "
                  "fewer scale factors, components or distances")
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
    err = next((e for e in errors if e["type"] == "extra_forbidden" or e["loc"][-1:] == ("[key]",)),
               errors[0])
    loc = [str(p) for p in err["loc"]]
    # pydantic adds the union/literal branch name to locations ("int", "literal['z','x']", ...)
    loc = [p for p in loc if not p.startswith(("literal[", "function-", "constrained-"))
           and p not in ("int", "float", "str", "bool", "none", "date")]
    kind = err["type"]
    if loc and loc[-1] == "[key]":
        # a key of a table keyed by component ([costs], [roadmap.rates]) is not a component
        loc, kind = loc[:-1], "extra_forbidden"
    # a list element as key[i] (pydantic gives the index as one more path part)
    path = "".join(p if not i else (f"[{p}]" if p.isdigit() else f".{p}") for i, p in enumerate(loc))
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

