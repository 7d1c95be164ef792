"""The circuits stage: distance, noise placement, CZ rewrite, and two sampled comparisons."""

from __future__ import annotations

import math
import pickle

import numpy as np
import pymatching
import pytest
import sinter
import stim
from scipy import stats

from planner.circuits import build_memory_circuit, layer_summary, noiseless_memory_circuit
from planner.config import COMPONENTS
from planner.noise import NoiseModel

CASES = [("surface", "z"), ("surface", "x"), ("repetition", "z")]
ANNOTATIONS = {"DETECTOR", "OBSERVABLE_INCLUDE", "SHIFT_COORDS", "QUBIT_COORDS"}
NOISE = {"DEPOLARIZE1", "DEPOLARIZE2", "X_ERROR", "Z_ERROR", "PAULI_CHANNEL_1"}


def distinct_model(native_2q: str) -> NoiseModel:
    """Every component non-zero and different, so a channel placed for the wrong component shows."""
    return NoiseModel(gate_1q=0.0011, gate_2q=0.0052, readout=0.0093, reset=0.0024, t1_us=50.0,
                      t2_us=40.0, idle_excess=0.0003, idle_measure_excess=0.0007, gate_1q_ns=25,
                      gate_2q_ns=40, measure_ns=500, reset_ns=200, native_2q=native_2q)


def zero_model(native_2q: str) -> NoiseModel:
    return distinct_model(native_2q).with_scales({c: 0.0 for c in COMPONENTS})


@pytest.mark.parametrize("native", ["cz", "cx"])
@pytest.mark.parametrize(("code", "basis"), CASES)
@pytest.mark.parametrize("d", [3, 5, 7])
def test_distance_and_decomposable_dem(code: str, basis: str, native: str, d: int) -> None:
    c = build_memory_circuit(distinct_model(native), code=code, distance=d, rounds=d, basis=basis)
    c.detector_error_model(decompose_errors=True)  # raises on non-deterministic detectors
    # the minimum-weight logical error of a distance-d code has d faults (common practice, no source)
    assert len(c.shortest_graphlike_error()) == d


# ---- noise placement, checked by an independent walk over the flattened circuit ---------------


def _layers(circuit: stim.Circuit) -> list[list[stim.CircuitInstruction]]:
    layers: list[list[stim.CircuitInstruction]] = [[]]
    for inst in circuit.flattened():
        if inst.name == "TICK":
            layers.append([])
        elif inst.name not in ANNOTATIONS:
            layers[-1].append(inst)
    return [layer for layer in layers if layer]


def _qubits(inst: stim.CircuitInstruction) -> list[int]:
    return [t.value for t in inst.targets_copy()]


def check_noise_placement(circuit: stim.Circuit, model: NoiseModel) -> dict[str, int]:
    """Assert every channel sits where the module doc says, with the model's probability.
    Returns counts of checked placements (so callers can see the walk did something)."""
    p1, p2 = model.probability("gate_1q"), model.probability("gate_2q")
    pr, ps = model.probability("readout"), model.probability("reset")
    layers = _layers(circuit)
    everyone = {q for layer in layers for inst in layer if inst.name not in NOISE for q in _qubits(inst)}
    counts = dict.fromkeys(("1q", "2q", "readout", "reset", "idle_layers"), 0)
    for index, layer in enumerate(layers):
        used: set[int] = set()
        consumed: set[int] = set()
        kinds = set()
        def expect(j: int, name: str, qs: list[int], p: float) -> None:
            """The channel ``name`` on ``qs`` with ``p`` sits at position j, unless p is 0."""
            found = layer[j] if 0 <= j < len(layer) else None
            if p == 0:
                assert found is None or (found.name, _qubits(found)) != (name, qs)
                return
            assert found is not None
            assert (found.name, _qubits(found), found.gate_args_copy()) == (name, qs, [p])
            consumed.add(j)

        for i, inst in enumerate(layer):
            if inst.name in NOISE:
                continue
            qs = _qubits(inst)
            used.update(qs)
            flip = "Z_ERROR" if inst.name.endswith("X") else "X_ERROR"
            if inst.name in ("M", "MR", "MX", "MRX"):
                expect(i - 1, flip, qs, pr)
                counts["readout"] += len(qs) if pr else 0
                kinds.add("measure")
            if inst.name in ("R", "MR", "RX", "MRX"):
                expect(i + 1, flip, qs, ps)
                counts["reset"] += len(qs) if ps else 0
                kinds.add("reset")
            if inst.name in ("CX", "CZ"):
                expect(i + 1, "DEPOLARIZE2", qs, p2)
                counts["2q"] += len(qs) // 2 if p2 else 0
                kinds.add("2q")
            if inst.name == "H":
                expect(i + 1, "DEPOLARIZE1", qs, p1)
                counts["1q"] += len(qs) if p1 else 0
                kinds.add("1q")
        rest = [inst for i, inst in enumerate(layer) if inst.name in NOISE and i not in consumed]
        idle = everyone - used
        if index == len(layers) - 1:
            assert rest == []  # the final readout layer: idle qubits are never used again
            continue
        duration = model.layer_duration_ns(has_2q="2q" in kinds, has_1q="1q" in kinds,
                                           has_measure="measure" in kinds, has_reset="reset" in kinds)
        twirl, excess = model.idle_channel(duration_ns=duration,
                                           during_measure=bool(kinds & {"measure", "reset"}))
        expected = []
        if idle and twirl.total > 0:
            expected.append(("PAULI_CHANNEL_1", sorted(idle), [twirl.px, twirl.py, twirl.pz]))
        if idle and excess > 0:
            expected.append(("DEPOLARIZE1", sorted(idle), [excess]))
        got = [(inst.name, sorted(_qubits(inst)), inst.gate_args_copy()) for inst in rest]
        assert len(got) == len(expected)
        for (gn, gq, ga), (en, eq, ea) in zip(got, expected, strict=True):
            assert (gn, gq) == (en, eq)
            assert ga == pytest.approx(ea, rel=1e-5)  # the circuit keeps 6 significant digits
        counts["idle_layers"] += bool(expected)
    return counts


@pytest.mark.parametrize("native", ["cz", "cx"])
@pytest.mark.parametrize(("code", "basis"), CASES)
@pytest.mark.parametrize("rounds", [1, 2, 4])
def test_noise_placement(code: str, basis: str, native: str, rounds: int) -> None:
    model = distinct_model(native).with_scales({"idle": 1.5, "reset": 0.5})
    c = build_memory_circuit(model, code=code, distance=3, rounds=rounds, basis=basis)
    counts = check_noise_placement(c, model)
    flat = c.flattened()
    num_measure = sum(len(i.targets_copy()) for i in flat if i.name in ("M", "MR", "MX", "MRX"))
    num_2q = sum(len(i.targets_copy()) // 2 for i in flat if i.name in ("CX", "CZ"))
    assert counts["readout"] == num_measure == c.num_measurements
    assert counts["2q"] == num_2q > 0
    assert counts["idle_layers"] > 0 and counts["reset"] > 0


def test_layers_of_a_repetition_round() -> None:
    c = build_memory_circuit(distinct_model("cx"), code="repetition", distance=3, rounds=1, basis="z")
    kinds = [s.kind for s in layer_summary(c)]
    # the data readout gets its own layer after the ancilla readout (module doc)
    assert kinds == ["reset", "2q", "2q", "measure+reset", "measure"]
    m = distinct_model("cx")
    assert [s.duration_ns(m) for s in layer_summary(c)] == [200, 40, 40, 700, 500]
    idle_in_readout = layer_summary(c)[3].noise
    assert idle_in_readout["PAULI_CHANNEL_1"] == 3 and idle_in_readout["DEPOLARIZE1"] == 3


@pytest.mark.parametrize(("code", "basis"), CASES)
@pytest.mark.parametrize("rounds", [1, 2, 5])
def test_zero_noise_cx_is_stims_circuit(code: str, basis: str, rounds: int) -> None:
    c = build_memory_circuit(zero_model("cx"), code=code, distance=3, rounds=rounds, basis=basis)
    assert not any(i.name in NOISE for i in c.flattened())
    ref = noiseless_memory_circuit(code=code, distance=3, rounds=rounds, basis=basis)
    if rounds >= 3:
        # the REPEAT block is kept, not unrolled
        assert any(isinstance(i, stim.CircuitRepeatBlock) and i.repeat_count == rounds - 1 for i in c)
    assert c.num_ticks == ref.num_ticks + 1  # the TICK restored before the final data readout
    assert str(c).replace("TICK\n", "") == str(ref).replace("TICK\n", "")


@pytest.mark.parametrize(("component", "names"), [
    ("gate_1q", {"DEPOLARIZE1"}), ("gate_2q", {"DEPOLARIZE2"}), ("readout", {"X_ERROR", "Z_ERROR"}),
    ("reset", {"X_ERROR", "Z_ERROR"}), ("idle", {"PAULI_CHANNEL_1", "DEPOLARIZE1"}),
    ("idle_measure", {"PAULI_CHANNEL_1", "DEPOLARIZE1"})])
@pytest.mark.parametrize("basis", ["z", "x"])
def test_a_perfect_component_leaves_no_channel(component: str, names: set[str], basis: str) -> None:
    only = distinct_model("cz").with_scales({c: 0.0 for c in COMPONENTS if c != component})
    c = build_memory_circuit(only, code="surface", distance=3, rounds=3, basis=basis)
    present = {i.name for i in c.flattened() if i.name in NOISE}
    assert present and present <= names
    check_noise_placement(c, only)
    none = distinct_model("cz").with_scales({component: 0.0})
    c0 = build_memory_circuit(none, code="surface", distance=3, rounds=3, basis=basis)
    assert c0.num_detectors == c.num_detectors
    # the zeroed component's channels are gone: fewer noise targets than with everything on
    full = build_memory_circuit(distinct_model("cz"), code="surface", distance=3, rounds=3, basis=basis)
    n_noise = lambda circ: sum(len(i.targets_copy()) for i in circ.flattened() if i.name in NOISE)  # noqa: E731
    assert n_noise(c0) + n_noise(c) == n_noise(full)


@pytest.mark.parametrize(("code", "basis"), CASES)
@pytest.mark.parametrize("rounds", [1, 3])
def test_cz_rewrite(code: str, basis: str, rounds: int) -> None:
    cz = build_memory_circuit(distinct_model("cz"), code=code, distance=5, rounds=rounds, basis=basis)
    ref = noiseless_memory_circuit(code=code, distance=5, rounds=rounds, basis=basis)
    flat = cz.flattened()
    assert not any(i.name == "CX" for i in flat)
    assert sum(len(i.targets_copy()) for i in flat if i.name == "CZ") == sum(
        len(i.targets_copy()) for i in ref.flattened() if i.name == "CX")
    # no qubit gets H in two adjacent layers (they would cancel)
    hs = [{q for i in layer if i.name == "H" for q in _qubits(i)} for layer in _layers(cz)]
    assert all(not (a & b) for a, b in zip(hs, hs[1:]))
    # annotations are untouched, in their order
    notes = lambda circ: [str(i) for i in circ.flattened() if i.name in ANNOTATIONS]  # noqa: E731
    assert notes(cz) == notes(ref)
    assert cz.num_detectors == ref.num_detectors and cz.num_observables == 1
    # noiseless, it computes the same deterministic outcomes: no detector or observable fires
    dets, obs = cz.without_noise().compile_detector_sampler(seed=1).sample(64, separate_observables=True)
    assert not dets.any() and not obs.any()


def test_bad_arguments_raise_value_error() -> None:
    m = distinct_model("cz")
    with pytest.raises(ValueError, match="basis"):
        build_memory_circuit(m, code="repetition", distance=3, rounds=3, basis="x")
    for d in (2, 4, 1, -3):
        with pytest.raises(ValueError, match="distance"):
            build_memory_circuit(m, code="surface", distance=d, rounds=3, basis="z")
    with pytest.raises(ValueError, match="rounds"):
        build_memory_circuit(m, code="surface", distance=3, rounds=0, basis="z")
    with pytest.raises(ValueError, match="code"):
        build_memory_circuit(m, code="color", distance=3, rounds=3, basis="z")


# ---- sampled comparisons -----------------------------------------------------------------------


def _logical_errors(circuit: stim.Circuit, *, shots: int, seed: int) -> int:
    dem = circuit.detector_error_model(decompose_errors=True)
    matching = pymatching.Matching.from_detector_error_model(dem)
    dets, obs = circuit.compile_detector_sampler(seed=seed).sample(shots, separate_observables=True)
    return int(np.count_nonzero(matching.decode_batch(dets)[:, 0] != obs[:, 0]))


def _clopper_pearson(k: int, n: int, level: float) -> tuple[float, float]:
    a = (1 - level) / 2
    low = stats.beta.ppf(a, k, n - k + 1) if k > 0 else 0.0
    high = stats.beta.ppf(1 - a, k + 1, n - k) if k < n else 1.0
    return float(low), float(high)


@pytest.mark.parametrize(("d", "shots"), [(3, 400_000), (5, 1_000_000), (7, 1_000_000)])
def test_repetition_code_matches_binomial_tail(d: int, shots: int) -> None:
    # data noise only: DEPOLARIZE1(q) on every data qubit while the ancillas are read, one round,
    # so each data qubit is flipped (X or Y) with p = 2q/3 and readout is perfect
    p = 0.05
    model = NoiseModel(gate_1q=0, gate_2q=0, readout=0, reset=0, idle_measure_excess=1.5 * p,
                       measure_ns=500, native_2q="cx")
    c = build_memory_circuit(model, code="repetition", distance=d, rounds=1, basis="z")
    k = _logical_errors(c, shots=shots, seed=d)
    # majority vote fails when more than half flip: Ekert et al., Introduction to Quantum
    # Information Science, sec. 11.7; Nielsen & Chuang sec. 10.1 (checks.md)
    exact = sum(math.comb(d, j) * p**j * (1 - p) ** (d - j) for j in range((d + 1) // 2, d + 1))
    low, high = _clopper_pearson(k, shots, 0.999)
    assert low <= exact <= high, (k / shots, exact)


@pytest.mark.parametrize("basis", ["z", "x"])
def test_uniform_cx_noise_agrees_with_stims_noisy_generator(basis: str) -> None:
    p, shots = 0.005, 500_000
    # idle_measure_excess = p on the data qubits during each readout stands for stim's
    # before_round_data_depolarization (once per round, at the other end of the round)
    ours = build_memory_circuit(
        NoiseModel(gate_1q=p, gate_2q=p, readout=p, reset=p, idle_excess=0.0, idle_measure_excess=p,
                   native_2q="cx"), code="surface", distance=3, rounds=3, basis=basis)
    ref = stim.Circuit.generated(
        f"surface_code:rotated_memory_{basis}", distance=3, rounds=3, after_clifford_depolarization=p,
        before_round_data_depolarization=p, before_measure_flip_probability=p,
        after_reset_flip_probability=p)
    k_ours = _logical_errors(ours, shots=shots, seed=11)
    k_ref = _logical_errors(ref, shots=shots, seed=12)
    # likelihood intervals at 99.9% (Wilks; sinter.fit_binomial), common practice, no source
    factor = math.exp(stats.chi2.ppf(0.999, 1) / 2)
    fit_ours = sinter.fit_binomial(num_shots=shots, num_hits=k_ours, max_likelihood_factor=factor)
    fit_ref = sinter.fit_binomial(num_shots=shots, num_hits=k_ref, max_likelihood_factor=factor)
    assert fit_ours.low <= fit_ref.high and fit_ref.low <= fit_ours.high, (k_ours, k_ref)
    # and the comparison has teeth: without readout noise ours falls well outside
    no_readout = build_memory_circuit(
        NoiseModel(gate_1q=p, gate_2q=p, readout=0.0, reset=p, idle_measure_excess=p, native_2q="cx"),
        code="surface", distance=3, rounds=3, basis=basis)
    k_off = _logical_errors(no_readout, shots=shots, seed=13)
    fit_off = sinter.fit_binomial(num_shots=shots, num_hits=k_off, max_likelihood_factor=factor)
    assert fit_off.high < fit_ref.low


@pytest.mark.parametrize(("code", "basis"), CASES)
def test_cz_circuit_measures_the_same_stabilizers(code: str, basis: str) -> None:
    # noise only on the data qubits between rounds (while the ancillas are read): each data
    # error must flip the same detectors in both gate sets, so the two models are the same
    def data_noise_only(native: str) -> NoiseModel:
        return NoiseModel(gate_1q=0, gate_2q=0, readout=0, reset=0, idle_measure_excess=0.01,
                          native_2q=native)
    dems = [build_memory_circuit(data_noise_only(n), code=code, distance=5, rounds=3, basis=basis)
            .detector_error_model() for n in ("cz", "cx")]
    assert dems[0].num_errors > 0
    assert dems[0].approx_equals(dems[1], atol=1e-12)


def test_the_built_circuit_is_its_own_text() -> None:
    # sinter pickles tasks for its workers, and stim pickles a circuit as its text
    c = build_memory_circuit(distinct_model("cz").with_scales({"idle": 1 / 3}), code="surface",
                             distance=3, rounds=3, basis="z")
    assert stim.Circuit(str(c)) == c
    assert pickle.loads(pickle.dumps(c)) == c
