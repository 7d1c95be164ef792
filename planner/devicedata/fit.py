"""Fitting excess error per component (and finding bad qubits) so that the model's detection
statistics match the measured ones.

The quantities fitted are every detector's detection probability and the pair probability p_ij
of every pair some mechanism of the model flips together, in the additive form of
:func:`~planner.devicedata.stats.to_additive` (where independent mechanisms add, so the model is
close to linear in each component's excess). Each component's column is the change of those
quantities when its excess is raised by :data:`STEP` (from the exact detector error model);
non-negative least squares (``scipy.optimize.nnls``), weighted by each quantity's bootstrap
spread, gives the excess; the fit is linearised again at the result (:data:`ITERATIONS`).
Intervals: percentiles of the same fit over bootstrap draws of the batches of shots (sampling
error only: a model that cannot match the data shows in ``reduced_chi2``, not in the widths).

Bad qubits: each qubit's column is the pattern of a depolarizing error on that qubit alone in
every layer; the residual (data minus fitted model) is matched against every column, the qubit
whose excess stands out most in sigma (bootstrap) is taken, its pattern removed, and so on
while one stands out beyond ``threshold`` sigma; the components are then fitted again together
with the qubits found (each with three columns: depolarizing in every layer, readout flip,
single-qubit gate error), so a bad qubit does not inflate a component's excess.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping, Sequence

import numpy as np
import stim
from scipy.optimize import nnls

from planner.devicedata.model import DetectorLayout, Expectation, expectation, with_qubit_noise
from planner.devicedata.stats import DetectorCounts, pair_probability, to_additive
from planner.errors import InputError
from planner.noise import NoiseModel

__all__ = ["DEFAULT_COMPONENTS", "EXCESS_FIELD", "ComponentFit", "ExcessFit", "Measured", "QubitOutlier",
           "check_components", "dem_of", "fit_excess", "measure", "with_excess"]

#: component -> the NoiseModel field (and target key under [device.errors]) its excess adds to
EXCESS_FIELD: dict[str, str] = {"gate_1q": "gate_1q", "gate_2q": "gate_2q", "readout": "readout",
                                "reset": "reset", "idle": "idle_excess", "idle_measure": "idle_measure_excess"}
#: fitted unless the caller names others: readout and reset, idle and gate_1q leave nearly the
#: same patterns in memory data (a fit of both splits their sum arbitrarily)
DEFAULT_COMPONENTS: tuple[str, ...] = ("gate_1q", "gate_2q", "readout", "idle_measure")
STEP = 1e-3
ITERATIONS = 2
DRAWS = 200
QUBIT_STEP = 1e-3
MAX_QUBITS = 5


def with_excess(model: NoiseModel, excess: Mapping[str, float]) -> NoiseModel:
    """``model`` with each component's probability raised by its excess (see :data:`EXCESS_FIELD`)."""
    changes = {EXCESS_FIELD[c]: getattr(model, EXCESS_FIELD[c]) + float(x) for c, x in excess.items()}
    return dataclasses.replace(model, **changes)


def dem_of(circuit: stim.Circuit) -> stim.DetectorErrorModel:
    return circuit.detector_error_model(decompose_errors=False, approximate_disjoint_errors=True)


@dataclasses.dataclass(frozen=True)
class Measured:
    """The measured quantities: ``pairs`` (I, J) selected, ``value`` [M] (singles then pairs,
    additive form), ``draws`` [draws, M] bootstrap values, ``sigma`` [M] their spread."""

    pairs: tuple[np.ndarray, np.ndarray]
    value: np.ndarray
    draws: np.ndarray
    sigma: np.ndarray

    def model_vector(self, e: Expectation) -> np.ndarray:
        i, j = self.pairs
        return np.concatenate([e.single, e.pair[i, j]])


def measure(counts: DetectorCounts, connected: np.ndarray, *, draws: int = DRAWS, seed: int = 0) -> Measured:
    """The measured quantities for the pairs ``connected`` marks (upper triangle)."""
    i, j = np.nonzero(np.triu(connected, 1))
    w = np.vstack([np.ones(len(counts.shots)), counts.bootstrap_weights(draws=draws, seed=seed)])
    n = w @ counts.shots
    s = (w @ counts.singles) / n[:, None]
    c = (w @ counts.pairs[:, i, j]) / n[:, None]
    pij = pair_probability(s[:, i], s[:, j], c)
    y = np.hstack([to_additive(s), to_additive(pij)])
    sigma = np.maximum(y[1:].std(axis=0), 1e-3 / np.sqrt(counts.num_shots))
    return Measured(pairs=(i, j), value=y[0], draws=y[1:], sigma=sigma)


@dataclasses.dataclass(frozen=True)
class ComponentFit:
    """A component's fitted excess (probability as placed in the circuit) with its interval."""

    name: str
    best: float
    low: float
    high: float


@dataclasses.dataclass(frozen=True)
class QubitOutlier:
    """A qubit whose data asks for extra error: ``excess`` (depolarizing per layer) with its
    interval, ``sigma`` (how far from zero, in bootstrap standard deviations)."""

    qubit: tuple[float, float]
    role: str
    best: float
    low: float
    high: float
    sigma: float
    #: the extra readout flip and the extra single-qubit gate error fitted beside it (best, low, high)
    readout: tuple[float, float, float] = (0.0, 0.0, 0.0)
    gate_1q: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclasses.dataclass(frozen=True)
class ExcessFit:
    """The fit: each component's excess, the bad qubits found, the fit's reduced chi-square over
    ``num_quantities`` detection and pair probabilities, the calibrated model and its exact
    statistics."""

    components: tuple[ComponentFit, ...]
    qubits: tuple[QubitOutlier, ...]
    reduced_chi2: float
    num_quantities: int
    #: the calibrated model (components only: the target file cannot hold per-qubit values)
    model: NoiseModel
    expectation: Expectation

    def excess(self) -> dict[str, float]:
        return {c.name: c.best for c in self.components}


def _solve(a: np.ndarray, b: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    x, _ = nnls(a / sigma[:, None], b / sigma, maxiter=50 * a.shape[1])
    return x


def check_components(components: Sequence[str]) -> list[str]:
    """The components to fit, checked (known names, at least one), each once.

    >>> check_components(["gate_2q", "gate2q"])
    Traceback (most recent call last):
    ...
    planner.errors.InputError: fit: cannot fit gate2q; allowed: gate_1q, gate_2q, readout, reset, idle, idle_measure
    """
    unknown = [c for c in components if c not in EXCESS_FIELD]
    if unknown or not components:
        raise InputError(f"cannot fit {', '.join(unknown) or 'nothing'}", field="fit",
                         allowed=", ".join(EXCESS_FIELD))
    return list(dict.fromkeys(components))


def fit_excess(measured: Measured, base: NoiseModel, build: Callable[[NoiseModel], stim.Circuit], *,
               layout: DetectorLayout, components: Sequence[str] = DEFAULT_COMPONENTS,
               threshold: float = 5.0, find_qubits: bool = True) -> ExcessFit:
    """Fit each of ``components``' excess over ``base`` (see the module doc)."""
    comps = check_components(components)

    def vector(model: NoiseModel) -> np.ndarray:
        return measured.model_vector(expectation(dem_of(build(model))))

    x = np.zeros(len(comps))
    for _ in range(ITERATIONS):
        at = with_excess(base, dict(zip(comps, x)))
        y0 = vector(at)
        cols = np.column_stack([(vector(with_excess(at, {c: STEP})) - y0) / STEP for c in comps])
        x = _solve(cols, measured.value - y0 + cols @ x, measured.sigma)
    x_lin = x
    calibrated = with_excess(base, dict(zip(comps, x)))
    noisy = build(calibrated)
    y_cal = vector(calibrated)
    found: list[tuple[int, float]] = []
    qcols = np.zeros((len(y_cal), 0))
    if find_qubits:
        found, qcols = _find_qubits(measured, noisy, y_cal, layout, threshold=threshold)
    # a bad qubit gets a readout column beside its depolarizing one: a qubit whose readout is bad
    # (not its gates) leaves another pattern, which the components must not absorb
    picked = [q for q, _ in found]
    rcols = qubit_columns(measured, noisy, picked, kind="readout")
    gcols = qubit_columns(measured, noisy, picked, kind="gate_1q")
    design = np.hstack([cols, qcols, rcols, gcols])
    offset = y0 - cols @ x_lin
    best = _solve(design, measured.value - offset, measured.sigma)
    boots = np.array([_solve(design, d - offset, measured.sigma) for d in measured.draws])
    low, high = np.percentile(boots, [2.5, 97.5], axis=0)
    low, high = np.minimum(low, best), np.maximum(high, best)
    resid = (measured.value - offset - design @ best) / measured.sigma
    dof = max(len(resid) - design.shape[1], 1)
    k = len(comps)
    fits = tuple(ComponentFit(name=c, best=float(best[n]), low=float(low[n]), high=float(high[n]))
                 for n, c in enumerate(comps))
    nq = len(found)

    def triple(at: int) -> tuple[float, float, float]:
        return float(best[at]), float(low[at]), float(high[at])

    qubits = tuple(QubitOutlier(qubit=layout.qubits[q], role=_role(layout, q), best=float(best[k + n]),
                                low=float(low[k + n]), high=float(high[k + n]), sigma=float(z),
                                readout=triple(k + nq + n), gate_1q=triple(k + 2 * nq + n))
                   for n, (q, z) in enumerate(found))
    final = with_excess(base, {c.name: c.best for c in fits})
    return ExcessFit(components=fits, qubits=qubits, reduced_chi2=float(resid @ resid / dof),
                     num_quantities=len(resid), model=final,
                     expectation=expectation(dem_of(build(final))))


def _role(layout: DetectorLayout, q: int) -> str:
    return "measure" if layout.qubits[q] in layout.measure else "data"


def qubit_columns(measured: Measured, circuit: stim.Circuit, qubits: Sequence[int], *,
                  kind: str = "depolarize") -> np.ndarray:
    """[M, Q]: the change of every measured quantity per unit of extra noise (``kind``, see
    :func:`~planner.devicedata.model.with_qubit_noise`) on each qubit."""
    if not qubits:
        return np.zeros((len(measured.value), 0))
    return np.column_stack([
        measured.model_vector(expectation(dem_of(with_qubit_noise(circuit, qubit=q, p=QUBIT_STEP, only=True,
                                                                  kind=kind)))) / QUBIT_STEP
        for q in qubits])


def _find_qubits(measured: Measured, circuit: stim.Circuit, y_cal: np.ndarray, layout: DetectorLayout, *,
                 threshold: float) -> tuple[list[tuple[int, float]], np.ndarray]:
    """Greedy: the qubit whose pattern best explains the residual, while beyond ``threshold``."""
    qs = sorted(layout.qubits)
    if not qs:
        return [], np.zeros((len(y_cal), 0))
    cols = qubit_columns(measured, circuit, qs)
    w = 1.0 / measured.sigma**2
    norm = np.einsum("mq,m,mq->q", cols, w, cols)
    ok = norm > 0
    r = measured.value - y_cal
    rb = measured.draws - y_cal
    found: list[tuple[int, float]] = []
    picked: list[int] = []
    for _ in range(MAX_QUBITS):
        a = np.where(ok, (cols.T @ (w * r)) / np.where(ok, norm, 1), 0.0)
        ab = np.where(ok[:, None], (cols.T @ (w[:, None] * rb.T)) / np.where(ok, norm, 1)[:, None], 0.0)
        spread = ab.std(axis=1)
        z = np.where(spread > 0, a / np.where(spread > 0, spread, 1), 0.0)
        z[picked] = -np.inf
        top = int(np.argmax(z))
        if not z[top] >= threshold:
            break
        found.append((qs[top], float(z[top])))
        picked.append(top)
        r = r - a[top] * cols[:, top]
        rb = rb - ab[top][:, None] * cols[:, top][None, :]
    return found, cols[:, picked] if picked else np.zeros((len(r), 0))
