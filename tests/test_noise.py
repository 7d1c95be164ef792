"""The noise stage: twirled T1/T2 idles, RB conversion, scaling, presets (no sampling)."""

from __future__ import annotations

import dataclasses
import itertools
import math

import numpy as np
import pytest
import stim

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.errors import InputError
from planner.noise import NoiseModel, PauliChannel, pauli_error_from_infidelity, twirl_idle

_I = np.eye(2, dtype=complex)
_X = np.array([[0, 1], [1, 0]], dtype=complex)
_Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
_Z = np.array([[1, 0], [0, -1]], dtype=complex)
_PAULIS_1Q = {"I": _I, "X": _X, "Y": _Y, "Z": _Z}


def _pauli_basis(n: int) -> dict[str, np.ndarray]:
    out = {}
    for names in itertools.product("IXYZ", repeat=n):
        m = np.eye(1, dtype=complex)
        for name in names:
            m = np.kron(m, _PAULIS_1Q[name])
        out["".join(names)] = m
    return out


def _damping_kraus(*, t_us: float, t1_us: float, t2_us: float) -> list[np.ndarray]:
    """Kraus operators of amplitude damping (T1) followed by pure dephasing, such that the
    excited population decays as exp(-t/T1) and the coherence as exp(-t/T2)."""
    gamma = 1 - math.exp(-t_us / t1_us)
    amp = [np.array([[1, 0], [0, math.sqrt(1 - gamma)]], dtype=complex),
           np.array([[0, math.sqrt(gamma)], [0, 0]], dtype=complex)]
    # coherence after amplitude damping is sqrt(1 - gamma) = exp(-t / 2T1); dephasing supplies the rest
    keep = math.exp(-t_us / t2_us + t_us / (2 * t1_us))
    lam = 1 - keep**2
    phase = [np.array([[1, 0], [0, math.sqrt(1 - lam)]], dtype=complex),
             np.array([[0, 0], [0, math.sqrt(lam)]], dtype=complex)]
    return [p @ a for a in amp for p in phase]


def _chi_diagonal(kraus: list[np.ndarray]) -> dict[str, float]:
    """Pauli-twirled probabilities: the diagonal of the chi matrix, sum_k |tr(P K_k)/D|^2."""
    dim = kraus[0].shape[0]
    n = int(round(math.log2(dim)))
    return {name: float(sum(abs(np.trace(p.conj().T @ k) / dim) ** 2 for k in kraus))
            for name, p in _pauli_basis(n).items()}


@pytest.mark.parametrize(("t_ns", "t1_us", "t2_us"), [
    (40.0, 50.0, 40.0), (700.0, 85.0, 70.0), (25.0, 20.0, 40.0), (1000.0, 30.0, 5.0)])
def test_twirl_matches_published_formula_and_numerical_twirl(t_ns: float, t1_us: float, t2_us: float) -> None:
    got = twirl_idle(duration_ns=t_ns, t1_us=t1_us, t2_us=t2_us)
    t = t_ns / 1000
    # Tomita & Svore, PRA 90, 062320 (2014), eqs. 9-10 (checks.md)
    px = (1 - math.exp(-t / t1_us)) / 4
    pz = (1 - math.exp(-t / t2_us)) / 2 - (1 - math.exp(-t / t1_us)) / 4
    assert got.px == pytest.approx(px, rel=1e-12, abs=1e-15)
    assert got.py == pytest.approx(px, rel=1e-12, abs=1e-15)
    assert got.pz == pytest.approx(pz, rel=1e-12, abs=1e-15)
    # independent check: twirl the composed amplitude- and phase-damping channels numerically
    chi = _chi_diagonal(_damping_kraus(t_us=t, t1_us=t1_us, t2_us=t2_us))
    assert sum(chi.values()) == pytest.approx(1.0, abs=1e-12)  # trace preserving
    assert abs(chi["X"] - got.px) < 1e-10
    assert abs(chi["Y"] - got.py) < 1e-10
    assert abs(chi["Z"] - got.pz) < 1e-10


def test_twirl_infinite_times_and_zero_duration_are_noiseless() -> None:
    assert twirl_idle(duration_ns=500, t1_us=math.inf, t2_us=math.inf).total == 0
    assert twirl_idle(duration_ns=0, t1_us=10, t2_us=10).total == 0


def test_t2_above_twice_t1_is_rejected() -> None:
    # T2 <= 2 T1 for any physical qubit (Tomita & Svore 2014; common practice)
    with pytest.raises(ValueError, match="2\\*T1"):
        twirl_idle(duration_ns=100, t1_us=10, t2_us=20.5)
    twirl_idle(duration_ns=100, t1_us=10, t2_us=20.0)  # the boundary is allowed
    bad = EXAMPLE_TOML.replace("t2_us = 40.0", "t2_us = 101.0")
    with pytest.raises(InputError, match="t2_us"):
        parse_target(bad, source="bad.toml")


def _stabilizer_states(n: int) -> list[np.ndarray]:
    """All n-qubit stabilizer states (a 3-design, so averages of quadratic functions are exact)."""
    seen: dict[bytes, np.ndarray] = {}
    for tableau in stim.Tableau.iter_all(n):
        v = tableau.to_state_vector(endian="little").astype(complex)
        v = v / v[np.flatnonzero(np.abs(v) > 1e-4)[0]]  # fix the global phase
        # amplitudes are now 0, +-1 or +-i (stim gives float32): make them exact
        v = np.round(v.real) + 1j * np.round(v.imag) + 0.0
        seen.setdefault(v.tobytes(), v / np.linalg.norm(v))
    return list(seen.values())


def _depolarize_average_fidelity(p: float, n: int) -> float:
    paulis = list(_pauli_basis(n).values())
    dim = 2**n
    fid = []
    for psi in _stabilizer_states(n):
        rho = np.outer(psi, psi.conj())
        # stim DEPOLARIZE1/2(p): each non-identity Pauli with p/(D^2 - 1) (stim gate reference)
        out = (1 - p) * rho + sum(q @ rho @ q.conj().T for q in paulis[1:]) * p / (dim**2 - 1)
        fid.append(float(np.real(psi.conj() @ out @ psi)))
    return float(np.mean(fid))


@pytest.mark.parametrize(("n", "p"), [(1, 0.003), (1, 0.2), (2, 0.005), (2, 0.3)])
def test_rb_infidelity_formula_checked_by_average_fidelity(n: int, p: float) -> None:
    dim = 2**n
    r_numeric = 1 - _depolarize_average_fidelity(p, n)
    # Nielsen, Phys. Lett. A 303, 249 (2002): r = p D / (D + 1) (checks.md)
    assert r_numeric == pytest.approx(p * dim / (dim + 1), rel=1e-9)
    assert pauli_error_from_infidelity(r_numeric, num_qubits=n) == pytest.approx(p, rel=1e-9)


def test_stabilizer_state_counts() -> None:
    # 6 one-qubit and 60 two-qubit stabilizer states (common practice, no source)
    assert len(_stabilizer_states(1)) == 6
    assert len(_stabilizer_states(2)) == 60


def test_rb_infidelity_in_a_target_is_converted() -> None:
    text = EXAMPLE_TOML.replace("gate_1q = 0.001", "gate_1q_infidelity = 0.002").replace(
        "gate_2q = 0.005", "gate_2q_infidelity = 0.004")
    model = NoiseModel.from_target(parse_target(text))
    # r = 2p/3 (1 qubit), r = 4p/5 (2 qubits): Nielsen 2002 (checks.md)
    assert model.probability("gate_1q") == pytest.approx(0.002 * 3 / 2)
    assert model.probability("gate_2q") == pytest.approx(0.004 * 5 / 4)


def _example_model() -> NoiseModel:
    return NoiseModel.from_target(parse_target(EXAMPLE_TOML))


def test_from_target_reads_every_number() -> None:
    m = _example_model()
    assert (m.gate_1q, m.gate_2q, m.readout, m.reset) == (0.001, 0.005, 0.01, 0.002)
    assert (m.t1_us, m.t2_us, m.native_2q) == (50.0, 40.0, "cz")
    assert m.layer_duration_ns(has_2q=True, has_1q=True, has_measure=False, has_reset=False) == 40
    assert m.layer_duration_ns(has_2q=False, has_1q=True, has_measure=False, has_reset=False) == 25
    assert m.layer_duration_ns(has_2q=False, has_1q=False, has_measure=True, has_reset=True) == 700
    assert m.layer_duration_ns(has_2q=False, has_1q=False, has_measure=True, has_reset=False) == 500


def test_with_scales_multiplies_each_component() -> None:
    m = _example_model()
    half = m.with_scales({"gate_2q": 0.5, "idle": 0.5})
    assert half.probability("gate_2q") == pytest.approx(0.0025)
    assert half.probability("readout") == m.probability("readout")
    twice = half.with_scales({"gate_2q": 0.5})
    assert twice.probability("gate_2q") == pytest.approx(0.00125)
    assert twice.scale("gate_2q") == pytest.approx(0.25)
    base, _ = m.idle_channel(duration_ns=40, during_measure=False)
    scaled, _ = half.idle_channel(duration_ns=40, during_measure=False)
    assert scaled.pz == pytest.approx(base.pz / 2) and scaled.px == pytest.approx(base.px / 2)
    # idle_measure is its own component: untouched by the idle scale
    assert half.idle_channel(duration_ns=700, during_measure=True) == m.idle_channel(
        duration_ns=700, during_measure=True)
    zero = m.with_scales({c: 0.0 for c in COMPONENTS})
    assert all(zero.probability(c) == 0 for c in ("gate_1q", "gate_2q", "readout", "reset"))
    tw, ex = zero.idle_channel(duration_ns=700, during_measure=True)
    assert tw.total == 0 and ex == 0


def test_with_scales_rejects_bad_factors() -> None:
    m = _example_model()
    with pytest.raises(KeyError):
        m.with_scales({"gate2q": 0.5})
    with pytest.raises(ValueError):
        m.with_scales({"gate_2q": -0.1})
    with pytest.raises(ValueError):
        m.with_scales({"gate_2q": math.inf})
    with pytest.raises(ValueError, match="readout"):
        m.with_scales({"readout": 60.0})  # 0.6 > 0.5: beyond a fully random flip


def test_si1000_preset_values() -> None:
    p = 0.001
    m = NoiseModel.si1000(p)
    # Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021), SI1000 table: CZ p, 1q gates
    # p/10, init 2p, measurement 5p, idle p/10, resonator idle 2p (from memory where checks.md
    # lists only the paper)
    assert m.native_2q == "cz"
    assert m.probability("gate_2q") == pytest.approx(p)
    assert m.probability("gate_1q") == pytest.approx(p / 10)
    assert m.probability("reset") == pytest.approx(2 * p)
    assert m.probability("readout") == pytest.approx(5 * p)
    tw, ex = m.idle_channel(duration_ns=0, during_measure=False)
    assert tw.total == 0 and ex == pytest.approx(p / 10)
    # readout and reset share one layer here: two DEPOLARIZE1(2p) composed, 1 - (1 - 4q/3)^2 scaled by 3/4
    _, ex_m = m.idle_channel(duration_ns=0, during_measure=True)
    assert ex_m == pytest.approx(0.75 * (1 - (1 - 8 * p / 3) ** 2))
    assert ex_m == pytest.approx(4 * p, rel=2e-3)


def test_sd6_preset_values() -> None:
    p = 0.002
    m = NoiseModel.sd6(p)
    # uniform depolarizing at p on every operation (Gidney et al. Quantum 5, 605 (2021); from memory)
    assert m.native_2q == "cx"
    assert all(m.probability(c) == p for c in ("gate_1q", "gate_2q", "readout", "reset"))
    for measure in (False, True):
        tw, ex = m.idle_channel(duration_ns=1000, during_measure=measure)
        assert tw == PauliChannel(0.0, 0.0, 0.0) and ex == p


def test_preset_in_a_target_keeps_its_gate_set() -> None:
    text = EXAMPLE_TOML.split("[device.errors]")[0].replace('native_2q = "cz"', 'native_2q = "cx"')
    text += '[device.preset]\nmodel = "sd6"\np = 0.003\n' + EXAMPLE_TOML[EXAMPLE_TOML.index("[goal]"):]
    model = NoiseModel.from_target(parse_target(text))
    assert model.native_2q == "cx" and model.probability("gate_2q") == 0.003
    assert dataclasses.replace(model, native_2q="cz").probability("readout") == 0.003
