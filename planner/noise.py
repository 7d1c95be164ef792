"""The named hardware components and their error probabilities.

A :class:`NoiseModel` holds today's probabilities of the six components in
:data:`planner.config.COMPONENTS` plus a scale factor per component. The scale factor multiplies
that component's probabilities *as placed in the circuit*:

- ``gate_1q``: p of the DEPOLARIZE1 after every single-qubit gate;
- ``gate_2q``: p of the DEPOLARIZE2 after every two-qubit gate;
- ``readout``: the flip probability before every measurement;
- ``reset``: the flip probability after every reset;
- ``idle``: each of p_x, p_y, p_z of the Pauli-twirled T1/T2 channel over a gate layer's duration,
  and the excess DEPOLARIZE1 probability, for every qubit not acted on in that layer;
- ``idle_measure``: the same for qubits idle in a measure/reset layer (the data qubits while the
  measure qubits are read out and reset), over that layer's duration;
- ``leakage``: not placed in the circuit: it multiplies the injection rates of a
  ``[device.leakage]`` section, which the leakage sampler reads from the task
  (:func:`leakage_parameters`); zero without the section.

So ``idle = 0.5`` halves the twirled idle probabilities (it is *not* a statement about T1 alone).
Scale 1 is today, 0 is a perfect component.

A model may also hold each listed qubit's own values (:class:`QubitNoise`: gate_1q, readout,
reset, T1, T2, the idle excesses) and each listed pair's own gate_2q (:class:`PairNoise`), keyed
by the circuits' qubit coordinates; the rest use the component values. The same formulas apply
to them (the twirl of the qubit's own T1/T2, the RB conversion), and a component's scale factor
multiplies every qubit's value of that component.

>>> m = NoiseModel.sd6(0.001).with_scales({"gate_2q": 0.5})
>>> m.probability("gate_2q"), m.probability("readout")
(0.0005, 0.001)
"""

from __future__ import annotations

import dataclasses
import functools
import math
import os
from collections.abc import Iterable, Mapping
from typing import Any

from planner.config import COMPONENTS, MAX_PROBABILITY, Target, coherence_problem
from planner.errors import InputError


@dataclasses.dataclass(frozen=True)
class PauliChannel:
    """A single-qubit Pauli channel: probabilities of X, Y and Z errors."""

    px: float
    py: float
    pz: float

    @property
    def total(self) -> float:
        return self.px + self.py + self.pz

    def scaled(self, factor: float) -> PauliChannel:
        return PauliChannel(self.px * factor, self.py * factor, self.pz * factor)


def twirl_idle(*, duration_ns: float, t1_us: float, t2_us: float) -> PauliChannel:
    """Pauli twirl of amplitude + phase damping over an idle of ``duration_ns``.

    p_x = p_y = (1 - exp(-t/T1)) / 4 and p_z = (1 - exp(-t/T2)) / 2 - (1 - exp(-t/T1)) / 4
    (Tomita & Svore, PRA 90, 062320 (2014), eqs. 9-10). Requires T2 <= 2 T1. Infinite times
    mean no decay.

    >>> c = twirl_idle(duration_ns=100, t1_us=50, t2_us=30)
    >>> round(c.px, 8), round(c.pz, 8)
    (0.0004995, 0.00116439)
    """
    if (problem := coherence_problem(t1_us=t1_us, t2_us=t2_us)) is not None:
        raise InputError(problem, field="t2_us")
    t_us = duration_ns / 1000.0
    decay1 = -math.expm1(-t_us / t1_us) if math.isfinite(t1_us) else 0.0
    decay2 = -math.expm1(-t_us / t2_us) if math.isfinite(t2_us) else 0.0
    pxy = decay1 / 4
    pz = decay2 / 2 - decay1 / 4
    return PauliChannel(pxy, pxy, max(pz, 0.0))


def pauli_error_from_infidelity(r: float, *, num_qubits: int) -> float:
    """Total Pauli error probability p of a depolarizing channel with average gate infidelity r.

    r = p * D / (D + 1) with D = 2**n (Nielsen, Phys. Lett. A 303, 249 (2002)), so
    p = r * (D + 1) / D: 3r/2 for one qubit, 5r/4 for two.

    >>> pauli_error_from_infidelity(0.002, num_qubits=1), pauli_error_from_infidelity(0.004, num_qubits=2)
    (0.003, 0.005)
    """
    d = 2**num_qubits
    return r * (d + 1) / d


def _compose_depolarizing(p: float, times: int) -> float:
    """DEPOLARIZE1(p) applied ``times`` times is DEPOLARIZE1 of the returned probability."""
    return 0.75 * (1 - (1 - 4 * p / 3) ** times)


Coords = tuple[float, float]


@dataclasses.dataclass(frozen=True)
class QubitNoise:
    """One qubit's own values at ``coords`` (the circuits' qubit coordinates); None is the
    component value. Gate errors are Pauli probabilities (an RB infidelity is converted first)."""

    coords: Coords
    gate_1q: float | None = None
    readout: float | None = None
    reset: float | None = None
    t1_us: float | None = None
    t2_us: float | None = None
    idle_excess: float | None = None
    idle_measure_excess: float | None = None
    #: where the values came from, for error messages (not part of the model's identity)
    origin: str = dataclasses.field(default="", compare=False, repr=False)


@dataclasses.dataclass(frozen=True)
class PairNoise:
    """One coupled pair's own two-qubit Pauli error; ``coords`` in ascending order."""

    coords: tuple[Coords, Coords]
    gate_2q: float
    origin: str = dataclasses.field(default="", compare=False, repr=False)


#: per-qubit field -> the component whose scale factor multiplies it
QUBIT_COMPONENT: dict[str, str] = {"gate_1q": "gate_1q", "readout": "readout", "reset": "reset",
                                   "idle_excess": "idle", "idle_measure_excess": "idle_measure"}


@dataclasses.dataclass(frozen=True)
class NoiseModel:
    """Today's error budget of a device and a scale factor per component (see module doc).

    Probabilities are per operation; times in microseconds (coherence) and nanoseconds
    (durations). ``math.inf`` coherence times mean no T1/T2 decay while idle.
    """

    gate_1q: float
    gate_2q: float
    readout: float
    reset: float
    t1_us: float = math.inf
    t2_us: float = math.inf
    idle_excess: float = 0.0
    idle_measure_excess: float = 0.0
    gate_1q_ns: float = 0.0
    gate_2q_ns: float = 0.0
    measure_ns: float = 0.0
    reset_ns: float = 0.0
    native_2q: str = "cz"
    label: str = "device"
    scales: tuple[tuple[str, float], ...] = ()
    #: each listed qubit's and pair's own values (the rest use the component values)
    qubits: tuple[QubitNoise, ...] = ()
    pairs: tuple[PairNoise, ...] = ()

    # ---- constructors ---------------------------------------------------------------------

    @classmethod
    def from_target(cls, target: Target) -> NoiseModel:
        """Today's model of the device described by a validated target file."""
        dev = target.device
        if dev.preset is not None:
            # the preset's own gate set: config refuses a native_2q that disagrees with it
            maker = {"sd6": cls.sd6, "si1000": cls.si1000}[dev.preset.model]
            return maker(dev.preset.p)
        e, c, t = dev.errors, dev.coherence, dev.durations
        assert c is not None and t is not None  # guaranteed by config validation
        g1 = e.gate_1q if e.gate_1q is not None else pauli_error_from_infidelity(
            e.gate_1q_infidelity or 0.0, num_qubits=1)
        g2 = e.gate_2q if e.gate_2q is not None else pauli_error_from_infidelity(
            e.gate_2q_infidelity or 0.0, num_qubits=2)
        model = cls(
            gate_1q=g1, gate_2q=g2, readout=e.readout, reset=e.reset,
            t1_us=c.t1_us, t2_us=c.t2_us,
            idle_excess=e.idle_excess, idle_measure_excess=e.idle_measure_excess,
            gate_1q_ns=t.gate_1q_ns, gate_2q_ns=t.gate_2q_ns, measure_ns=t.measure_ns,
            reset_ns=t.reset_ns, native_2q=dev.native_2q, label=dev.name,
            qubits=qubit_noise_from_target(target), pairs=pair_noise_from_target(target),
        )
        model.check()
        return model

    @classmethod
    def sd6(cls, p: float) -> NoiseModel:
        """SD6 (Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021)): uniform depolarizing
        at p on every gate, reset, measurement and idle qubit in every layer, on CX circuits."""
        return cls(gate_1q=p, gate_2q=p, readout=p, reset=p, idle_excess=p,
                   idle_measure_excess=p, native_2q="cx", label=f"SD6(p={p:g})")

    @classmethod
    def si1000(cls, p: float) -> NoiseModel:
        """SI1000 (Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021)): CZ p, 1q gates p/10,
        idle in gate layers p/10, reset flip 2p, readout flip 5p, idle during measurement and
        during reset 2p each, on CZ circuits. Our circuits read out and reset in one layer, so its
        idlers get the two DEPOLARIZE1(2p) composed into one. The depolarization after a
        measurement is left out: every qubit measured here is reset or never used again."""
        return cls(gate_1q=p / 10, gate_2q=p, readout=5 * p, reset=2 * p, idle_excess=p / 10,
                   idle_measure_excess=_compose_depolarizing(2 * p, 2), native_2q="cz",
                   label=f"SI1000(p={p:g})")

    # ---- scaling --------------------------------------------------------------------------

    def scale(self, component: str) -> float:
        if component not in COMPONENTS:
            raise KeyError(f"unknown component {component!r}; known: {', '.join(COMPONENTS)}")
        return dict(self.scales).get(component, 1.0)

    def with_scales(self, factors: Mapping[str, float]) -> NoiseModel:
        """A copy with each named component's scale multiplied by its factor."""
        current = {c: self.scale(c) for c in COMPONENTS}
        for comp, f in factors.items():
            if comp not in COMPONENTS:
                raise KeyError(f"unknown component {comp!r}; known: {', '.join(COMPONENTS)}")
            if not (f >= 0 and math.isfinite(f)):
                raise InputError(f"scale factor for {comp} must be a finite number >= 0, got {f}",
                                 field="scales", allowed="finite numbers >= 0")
            current[comp] *= f
        kept = tuple((c, current[c]) for c in COMPONENTS if current[c] != 1.0)
        out = dataclasses.replace(self, scales=kept)
        out.check()
        return out

    # ---- probabilities as placed ----------------------------------------------------------

    def probability(self, component: str, *, at: Coords | tuple[Coords, Coords] | None = None) -> float:
        """Scaled probability of a gate/readout/reset component (per operation); ``at``: the
        qubit's coordinates (a pair's two, for ``gate_2q``) to use its own value where it has one."""
        base = {"gate_1q": self.gate_1q, "gate_2q": self.gate_2q, "readout": self.readout,
                "reset": self.reset}
        if component not in base:
            raise KeyError(f"{component} is an idle component: use idle_channel()")
        value = base[component]
        if at is not None and component == "gate_2q":
            pair = self._pair_map.get(tuple(sorted(at)))  # type: ignore[arg-type]
            value = pair.gate_2q if pair is not None else value
        elif at is not None:
            value = self.qubit_value(component, at)  # type: ignore[arg-type]
        return value * self.scale(component)

    def qubit_value(self, name: str, at: Coords) -> float:
        """The qubit's own unscaled value of a :class:`QubitNoise` field, else the component's."""
        own = self._qubit_map.get(at)
        value = getattr(own, name) if own is not None else None
        return value if value is not None else getattr(self, name)

    @functools.cached_property
    def _qubit_map(self) -> dict[Coords, QubitNoise]:
        return {q.coords: q for q in self.qubits}

    @functools.cached_property
    def _pair_map(self) -> dict[tuple[Coords, Coords], PairNoise]:
        return {p.coords: p for p in self.pairs}

    def idle_channel(self, *, duration_ns: float, during_measure: bool,
                     at: Coords | None = None) -> tuple[PauliChannel, float]:
        """(twirled T1/T2 channel, excess DEPOLARIZE1 probability) for one idle qubit in one layer,
        both already scaled by ``idle`` (gate layers) or ``idle_measure`` (measure/reset layers);
        ``at``: the qubit's coordinates, to use its own T1, T2 and excess where it has them."""
        comp = "idle_measure" if during_measure else "idle"
        name = "idle_measure_excess" if during_measure else "idle_excess"
        if at is None or at not in self._qubit_map:
            excess, t1, t2 = getattr(self, name), self.t1_us, self.t2_us
        else:
            excess = self.qubit_value(name, at)
            t1, t2 = self.qubit_value("t1_us", at), self.qubit_value("t2_us", at)
        s = self.scale(comp)
        twirl = twirl_idle(duration_ns=duration_ns, t1_us=t1, t2_us=t2)
        return twirl.scaled(s), excess * s

    def layer_duration_ns(self, *, has_2q: bool, has_1q: bool, has_measure: bool, has_reset: bool) -> float:
        """Duration of one layer (TICK) from the kinds of operation in it: the slowest kind."""
        if has_measure or has_reset:
            return (self.measure_ns if has_measure else 0.0) + (self.reset_ns if has_reset else 0.0)
        if has_2q:
            return self.gate_2q_ns
        if has_1q:
            return self.gate_1q_ns
        return 0.0

    def check(self) -> None:
        """Raise :class:`~planner.errors.InputError` (a ValueError) if any scaled probability leaves
        its meaningful range (:data:`~planner.config.MAX_PROBABILITY`), for the component values
        and every qubit's and pair's own."""
        places: list[Any] = [None, *(q.coords for q in self.qubits)]
        for comp in ("gate_1q", "gate_2q", "readout", "reset"):
            for at in ([None, *(p.coords for p in self.pairs)] if comp == "gate_2q" else places):
                p = self.probability(comp, at=at)
                if not 0 <= p <= MAX_PROBABILITY[comp]:
                    where = "" if at is None else f" at {at}"
                    raise InputError(f"scaled probability {p:g}{where} is outside [0, "
                                     f"{MAX_PROBABILITY[comp]:g}] (scale {self.scale(comp):g})", field=comp)
        longest = max(self.gate_1q_ns, self.gate_2q_ns, self.measure_ns + self.reset_ns)
        for measure, at in ((m, at) for m in (False, True) for at in places):
            twirl, excess = self.idle_channel(duration_ns=longest, during_measure=measure, at=at)
            comp = "idle_measure" if measure else "idle"
            if twirl.total > MAX_PROBABILITY[comp] or excess > MAX_PROBABILITY[comp]:
                raise InputError(f"scaled idle error {twirl.total + excess:g} is too large "
                                 f"(scale {self.scale(comp):g})", field=comp,
                                 allowed=f"at most {MAX_PROBABILITY[comp]:g}")

    def to_json(self) -> dict[str, Any]:
        """JSON-native description (for reports and the manifest)."""
        d = dataclasses.asdict(self)
        d["scales"] = {c: self.scale(c) for c in COMPONENTS}
        for k in ("t1_us", "t2_us"):
            if not math.isfinite(d[k]):
                d[k] = None
        return d

    def summary(self) -> dict[str, float]:
        """Scaled per-operation error of each component, idles over their typical layer
        (a 2q-gate layer and a measure+reset layer): the numbers a person compares."""
        out = {c: self.probability(c) for c in ("gate_1q", "gate_2q", "readout", "reset")}
        tw, ex = self.idle_channel(duration_ns=self.gate_2q_ns, during_measure=False)
        out["idle"] = tw.total + ex
        tw, ex = self.idle_channel(duration_ns=self.measure_ns + self.reset_ns, during_measure=True)
        out["idle_measure"] = tw.total + ex
        return out


# ---------------------------------------------------------------------------------------------
# per-qubit and per-pair values of a target (planner.config.qubits), as the model holds them


def qubit_noise_from_target(target: Target) -> tuple[QubitNoise, ...]:
    """Each listed qubit's own values (RB infidelities converted like the component's)."""
    dev = target.device
    out = []
    for key, v in sorted(dev.qubits.items(), key=lambda kv: _coords(kv[0])):
        g1 = v.gate_1q if v.gate_1q_infidelity is None else pauli_error_from_infidelity(
            v.gate_1q_infidelity, num_qubits=1)
        out.append(QubitNoise(coords=_coords(key), gate_1q=g1, readout=v.readout, reset=v.reset,
                              t1_us=v.t1_us, t2_us=v.t2_us, idle_excess=v.idle_excess,
                              idle_measure_excess=v.idle_measure_excess,
                              origin=_origin(target, table=dev.qubit_table, inline="qubits", key=key)))
    return tuple(out)


def pair_noise_from_target(target: Target) -> tuple[PairNoise, ...]:
    """Each listed pair's own two-qubit Pauli error (pairs giving neither value are left out)."""
    dev = target.device
    out = []
    for key, v in sorted(dev.pairs.items()):
        if v.gate_2q is None and v.gate_2q_infidelity is None:
            continue
        g2 = v.gate_2q if v.gate_2q is not None else pauli_error_from_infidelity(
            v.gate_2q_infidelity or 0.0, num_qubits=2)
        a, b = key.split("-")
        out.append(PairNoise(coords=(_coords(a), _coords(b)), gate_2q=g2,
                             origin=_origin(target, table=dev.pair_table, inline="pairs", key=key)))
    return tuple(out)


def _origin(target: Target, *, table: str | None, inline: str, key: str) -> str:
    """Where an entry came from, for error messages: the CSV table (relative to the target file)
    when there is one (inline entries override its rows), else the target's inline table."""
    if table is not None:
        base = os.path.dirname(target.source) if target.source != "<memory>" else ""
        return f"{os.path.join(base, table)}: {key} (or {target.source}: device.{inline}.\"{key}\")"
    return f'{target.source}: device.{inline}."{key}"'


def _coords(key: str) -> Coords:
    x, y = key.split(",")
    return float(x), float(y)


def with_qubits(model: NoiseModel, qubits: Iterable[QubitNoise], pairs: Iterable[PairNoise]) -> NoiseModel:
    """A copy of ``model`` with these per-qubit and per-pair values instead of its own (checked)."""
    out = dataclasses.replace(model, qubits=tuple(qubits), pairs=tuple(pairs))
    out.check()
    return out
# leakage (see planner.config.leakage): parameters for the leakage sampler, not circuit noise


def leakage_parameters(target: Target, scale: float = 1.0) -> dict[str, Any] | None:
    """The ``[device.leakage]`` section with the ``leakage`` component's ``scale`` applied to its
    injection rates, plus the layer durations heating needs: JSON-native, for a task's metadata
    (so the parameters are part of its strong id). None without the section.

    >>> from planner.config import EXAMPLE_TOML, parse_target
    >>> leakage_parameters(parse_target(EXAMPLE_TOML)) is None
    True
    """
    section = target.device.leakage
    if section is None:
        return None
    doc: dict[str, Any] = section.scaled(scale).model_dump(mode="json")
    durations = target.device.durations
    for key in ("gate_1q_ns", "gate_2q_ns", "measure_ns", "reset_ns"):
        doc[key] = float(getattr(durations, key)) if durations is not None else 0.0
    return doc
