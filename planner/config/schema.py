"""The target file's schema: frozen pydantic models of each section, numbers taken as TOML
numbers only (never converted from text)."""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import unicodedata
from pathlib import Path
from typing import Annotated, Literal

from pydantic import (
    Field,
    SerializerFunctionWrapHandler,
    field_validator,
    model_serializer,
    model_validator,
)

from planner.config.leakage import Leakage
from planner.config.types import Frozen, Integer, Number, Positive, Probability
from planner.config.limits import (
    COMPONENTS,
    MAX_DISTANCES,
    MAX_NAME_LENGTH,
    MAX_QUBITS,
    MAX_ROUND_COUNTS,
    MAX_SCALES,
    MAX_START,
    MIN_START,
    distance_problem,
)
from planner.config.qubits import PairValues, QubitValues, Spread, inline_pairs, inline_qubits, spread_keys


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


# numbers are TOML numbers: a quoted "4.5e-3" or a boolean is refused, never converted
_Frozen = Frozen


#: Round counts per distance when the target gives neither ``rounds`` nor ``round_multiples``:
#: r = d and r = 3d (the per-cycle rate from the fidelity decay between them)
DEFAULT_ROUND_MULTIPLES: tuple[int, ...] = (1, 3)


#: The two-qubit gate each preset is defined with (Gidney, Newman, Fowler, Broughton, Quantum 5,
#: 605 (2021)): SD6 on CX circuits, SI1000 on CZ circuits. A preset sets the device's gate set.
PRESET_NATIVE_2Q: dict[str, str] = {"sd6": "cx", "si1000": "cz"}


class Preset(_Frozen):
    """A published noise model instead of a measured budget (for comparison with the literature).

    ``sd6``: uniform depolarizing at p on every operation, CX-native; ``si1000``: the
    superconducting-inspired model, CZ-native; both of Gidney, Newman, Fowler, Broughton,
    Quantum 5, 605 (2021). The preset sets ``device.native_2q`` (see :data:`PRESET_NATIVE_2Q`).
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
    leakage: Leakage | None = None  # [device.leakage]: see planner.config.leakage

    @field_validator("name")
    @classmethod
    def _name(cls, v: str) -> str:
        return _plain_text(v)

    @model_validator(mode="before")
    @classmethod
    def _preset_gate_set(cls, data: object) -> object:
        """Without a native_2q key, a preset's own gate set is the device's (one that disagrees
        is refused by the checks, naming the key)."""
        if isinstance(data, dict) and "native_2q" not in data:
            preset = data.get("preset")
            model = preset.get("model") if isinstance(preset, dict) else getattr(preset, "model", None)
            if isinstance(model, str) and model in PRESET_NATIVE_2Q:
                return {**data, "native_2q": PRESET_NATIVE_2Q[model]}
        return data

    # ---- per-qubit and per-pair values (planner.config.qubits) -----------------------------
    #: each qubit's own values, keyed "x,y" (after loading: the CSV table's rows too)
    qubits: dict[str, QubitValues] = {}
    #: each coupled pair's own two-qubit error, keyed "x1,y1-x2,y2" (smaller coordinate first)
    pairs: dict[str, PairValues] = {}
    #: CSV files of per-qubit / per-pair values, relative to the target file
    qubit_table: str | None = None
    pair_table: str | None = None
    #: qubit-to-qubit spread for `planner spread` (decides no sampled circuit: not hashed)
    spread: Spread | None = None

    @field_validator("qubits", mode="before")
    @classmethod
    def _qubits(cls, v: object) -> object:
        return inline_qubits(v)

    @field_validator("pairs", mode="before")
    @classmethod
    def _pairs(cls, v: object) -> object:
        return inline_pairs(v)

    @field_validator("spread", mode="before")
    @classmethod
    def _spread(cls, v: object) -> object:
        return spread_keys(v)

    @field_validator("qubit_table", "pair_table")
    @classmethod
    def _table_path(cls, v: str | None) -> str | None:
        return None if v is None else _plain_text(v)

    @model_serializer(mode="wrap")
    def _without_empty_tables(self, handler: SerializerFunctionWrapHandler) -> dict[str, object]:
        """A device without tables dumps (and hashes) as before they existed; the spread never
        decides a sampled circuit, so it is left out too."""
        out = handler(self)
        for key in ("qubits", "pairs", "qubit_table", "pair_table", "spread"):
            if key == "spread" or not out.get(key):
                out.pop(key, None)
        return out


class Goal(_Frozen):
    """The goal. ``basis`` says what the goal's logical error per cycle refers to at each
    distance: ``"mean"`` (the mean of the X and Z bases) or ``"worse"`` (the larger of the two)."""

    logical_error_per_cycle: Annotated[Number, Field(gt=0.0, lt=0.5)]
    max_qubits: Annotated[Integer, Field(ge=5, le=MAX_QUBITS)] = 10_000
    basis: Literal["mean", "worse"] = "mean"


class Sweep(_Frozen):
    code: Literal["surface", "repetition"] = "surface"
    distances: tuple[Integer, ...]
    bases: tuple[Literal["z", "x"], ...] = ("z", "x")
    #: one fixed round count for every distance (refused together with ``round_multiples``)
    rounds: Annotated[Integer, Field(ge=1)] | None = None
    #: round counts as multiples of the distance (r = m d); with two or more the per-cycle rate
    #: comes from the fidelity decay between them. Default [1, 3] when ``rounds`` is not given.
    round_multiples: tuple[Annotated[Integer, Field(ge=1)], ...] | None = None
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

    @field_validator("round_multiples")
    @classmethod
    def _round_multiples(cls, v: tuple[int, ...] | None) -> tuple[int, ...] | None:
        if v is None:
            return v
        if not v:
            raise ValueError("is empty: give 1 to 4 multiples of the distance, e.g. [1, 3]")
        v = tuple(sorted(set(v)))
        if len(v) > MAX_ROUND_COUNTS:
            raise ValueError(f"{len(v)} round counts: at most {MAX_ROUND_COUNTS} are allowed")
        return v

    @property
    def multiples(self) -> tuple[int, ...] | None:
        """The round counts as multiples of d (None: one fixed ``rounds`` for every distance)."""
        if self.rounds is not None:
            return None
        return self.round_multiples if self.round_multiples is not None else DEFAULT_ROUND_MULTIPLES

    def round_counts(self, distance: int) -> tuple[int, ...]:
        """The round counts sampled at ``distance``, smallest first.

        >>> Sweep(distances=(3, 5)).round_counts(5), Sweep(distances=(3,), rounds=4).round_counts(3)
        ((5, 15), (4,))
        """
        m = self.multiples
        return (self.rounds,) if m is None else tuple(k * distance for k in m)

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

    #: distances sampled beyond ``distances`` on the joint axis (see
    #: :func:`planner.sweep.reach_tasks`): "auto" (d_max + 2 and d_max + 4, up to the goal
    #: distance, when that lies beyond d_max + 2), a list of odd distances, or [] (none: the
    #: default, so a grid's tasks and their cost stay what the file lists)
    reach_distances: Literal["auto"] | tuple[Integer, ...] = ()

    @field_validator("reach_distances")
    @classmethod
    def _reach_distances(cls, v: str | tuple[int, ...]) -> str | tuple[int, ...]:
        if isinstance(v, str):
            return v
        for d in v:
            if (problem := distance_problem(d)) is not None:
                raise ValueError(f"distance {problem}")
        if len(set(v)) > MAX_DISTANCES:
            raise ValueError(f"{len(set(v))} distances: at most {MAX_DISTANCES} are allowed")
        return tuple(sorted(set(v)))


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
    """A whole target file, validated and frozen: the device's error budget, the goal, the sweep
    grid, the costs of improving each component and the roadmap rates (read it with
    :func:`planner.load_target` or :func:`planner.parse_target`)."""

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
        if self.sweep.components:
            return tuple(self.sweep.components)
        # without a [device.leakage] section the leakage component is zero: no axis for it
        return COMPONENTS if self.device.leakage is not None else tuple(c for c in COMPONENTS if c != "leakage")

    @property
    def sampling_sha256(self) -> str:
        """Hash of what decides the samples (the device and the sweep sections). Editing the goal,
        the costs or the roadmap leaves it unchanged, so existing samples stay usable."""
        doc = self.model_dump(include={"device", "sweep"}, mode="json")
        return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()

    def cost(self, component: str) -> float:
        return float(self.costs.get(component, 1.0))


