"""Calculator mode: distance and qubits from measured numbers, no sampling.

From a measured Lambda and a measured logical error per cycle ``eps_D`` at distance D, the
ansatz eps_d = A * Lambda^(-(d+1)/2) (Google Quantum AI, Nature 638, 920 (2025), eq. 1) gives
eps_d = eps_D * Lambda^(-(d-D)/2) and A = eps_D * Lambda^((D+1)/2); a rotated surface code of
distance d needs 2 d^2 - 1 physical qubits (same paper).

With a qubit budget Q the answer also gives the largest distance within Q and its eps per cycle.
With one-sigma uncertainties on the measured Lambda and eps (taken as independent and
log-normal: sigma_ln = sigma / value), the answers carry :data:`~planner.fits.CONFIDENCE`
intervals: eps per cycle at a distance and the required Lambda exactly in log space
(ln eps_d = ln eps_D - (d - D)/2 ln Lambda is linear in the two inputs), the smallest distance and
its qubits as quantiles of :data:`DRAWS` seeded draws of the two inputs (the distance is a step
function of them).

>>> a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6)
>>> a.distance, a.physical_qubits, a.logical_error_per_cycle
(25, 1249, 9.765625e-07)
>>> b = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6, qubits=1000)
>>> b.budget_distance, b.budget_physical_qubits, b.budget_meets_target
(21, 881, False)
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from planner.errors import InputError
from planner.fits import CONFIDENCE, Z_SCORE, Interval
from planner.planning.limits import MAX_DISTANCE, check_distance, check_rate
from planner.planning.model import physical_qubits

#: draws of the measured inputs behind the distance and qubit intervals (seeded: the same
#: numbers give the same interval every time)
DRAWS = 20_000


@dataclasses.dataclass(frozen=True, kw_only=True)
class CalculatorAnswer:
    """What a measured Lambda and eps per cycle at one distance imply for a goal: the smallest
    distance reaching it, its qubits and its eps per cycle (or why it is not reachable)."""

    suppression: float
    eps_measured: float
    measured_distance: int
    eps_target: float
    reachable: bool
    distance: int | None
    physical_qubits: int | None
    logical_error_per_cycle: float | None
    #: Lambda that would meet the target at the measured distance with the same prefactor A
    required_suppression: float
    prefactor: float
    note: str = ""
    #: with a qubit budget: the largest distance within it, its qubits and eps per cycle
    qubit_budget: int | None = None
    budget_distance: int | None = None
    budget_physical_qubits: int | None = None
    budget_logical_error_per_cycle: float | None = None
    #: one-sigma uncertainties of the measured Lambda and eps (None: taken as exact)
    suppression_sigma: float | None = None
    eps_sigma: float | None = None
    #: intervals (keys as in :meth:`to_json`), present when an uncertainty was given
    intervals: dict[str, Interval] = dataclasses.field(default_factory=dict)
    #: fraction of the draws in which the target is reachable within the largest distance
    reachable_fraction: float | None = None

    @property
    def budget_meets_target(self) -> bool | None:
        e = self.budget_logical_error_per_cycle
        return None if e is None else e <= self.eps_target

    def to_json(self) -> dict[str, Any]:
        return {"distance": self.distance, "physical_qubits": self.physical_qubits,
                "logical_error_per_cycle": self.logical_error_per_cycle, "reachable": self.reachable,
                "required_suppression_factor": self.required_suppression,
                "required_suppression_factor_at_distance": self.measured_distance,
                "prefactor_a": self.prefactor, "suppression_factor": self.suppression,
                # the calculator's first words for the same numbers, kept for scripts that read them
                "required_lambda": self.required_suppression,
                "required_lambda_at_distance": self.measured_distance, "lambda": self.suppression,
                "measured_logical_error_per_cycle": self.eps_measured,
                "target_logical_error_per_cycle": self.eps_target, "note": self.note,
                "qubit_budget": self.qubit_budget, "budget_distance": self.budget_distance,
                "budget_physical_qubits": self.budget_physical_qubits,
                "budget_logical_error_per_cycle": self.budget_logical_error_per_cycle,
                "budget_meets_target": self.budget_meets_target,
                "uncertainty": {"suppression_factor_sigma": self.suppression_sigma,
                                "logical_error_per_cycle_sigma": self.eps_sigma, "confidence": CONFIDENCE,
                                "reachable_fraction": self.reachable_fraction},
                "intervals": {k: v.to_json() for k, v in self.intervals.items()}}


#: largest measured Lambda taken: the ansatz has only been checked near threshold (Lambda of a
#: few), and a factor above this says more about the input than about a device
MAX_LAMBDA = 1000.0
#: largest prefactor A = eps_D * Lambda^((D+1)/2) taken: eps_1 = A / Lambda is at most 1/2 on any
#: device, so an A this large means the three numbers do not belong together
MAX_PREFACTOR = 1e300


def calculate(*, suppression: float, eps: float, distance: int, eps_target: float,
              qubits: int | None = None, suppression_sigma: float | None = None,
              eps_sigma: float | None = None, code: str = "surface") -> CalculatorAnswer:
    """Smallest odd distance meeting ``eps_target`` from a measured Lambda and eps at ``distance``
    (and, given ``qubits``, the largest distance within that budget; given one-sigma
    uncertainties, intervals on every answer: see the module docstring).

    Works in logarithms, so no intermediate overflows; a distance beyond
    :data:`~planner.planning.limits.MAX_DISTANCE` is "not reachable" (exit 0), inputs out of range
    raise :class:`~planner.errors.InputError`.
    """
    point = _calculate_point(suppression=suppression, eps=eps, distance=distance, eps_target=eps_target)
    extra: dict[str, Any] = {}
    if qubits is not None:
        extra.update(_budget(point, qubits, code))
    if suppression_sigma is not None or eps_sigma is not None:
        extra.update(_spread(point, suppression_sigma or 0.0, eps_sigma or 0.0,
                             budget_distance=extra.get("budget_distance"), code=code))
    return dataclasses.replace(point, **extra)


def _eps_at(a: CalculatorAnswer, d: int) -> float:
    """eps per cycle at distance ``d`` from the measured numbers (in logarithms)."""
    return math.exp(math.log(a.eps_measured) - (d - a.measured_distance) / 2 * math.log(a.suppression))


def _budget(a: CalculatorAnswer, qubits: int, code: str) -> dict[str, Any]:
    """The largest odd distance within ``qubits`` and its eps per cycle."""
    if isinstance(qubits, bool) or not isinstance(qubits, int) or qubits < physical_qubits(3, code):
        raise InputError(f"{qubits!r} is not allowed: a qubit budget", field="qubits",
                         allowed=f"a whole number >= {physical_qubits(3, code)} (a distance-3 {code} code)")
    d = 3
    while d + 2 <= MAX_DISTANCE and physical_qubits(d + 2, code) <= qubits:
        d += 2
    return {"qubit_budget": qubits, "budget_distance": d, "budget_physical_qubits": physical_qubits(d, code),
            "budget_logical_error_per_cycle": _eps_at(a, d)}


def _log_interval(best: float, sd: float) -> Interval:
    return Interval(low=best * math.exp(-Z_SCORE * sd), best=best, high=best * math.exp(Z_SCORE * sd))


def _sigma(name: str, sigma: float, value: float) -> float:
    if not (math.isfinite(sigma) and 0 <= sigma < value):
        raise InputError(f"{sigma!r} is not allowed: a one-sigma uncertainty of {value:g}",
                         field=name, allowed=f"0 <= sigma < the value ({value:g})")
    return sigma / value


def _spread(a: CalculatorAnswer, suppression_sigma: float, eps_sigma: float, *,
            budget_distance: int | None, code: str) -> dict[str, Any]:
    """Intervals from one-sigma uncertainties of the measured Lambda and eps (log-normal)."""
    s_l = _sigma("suppression_sigma", suppression_sigma, a.suppression)
    s_e = _sigma("eps_sigma", eps_sigma, a.eps_measured)
    big_d = a.measured_distance
    k = (big_d + 1) / 2
    iv = {"required_suppression_factor": _log_interval(a.required_suppression, math.hypot(s_l, s_e / k))}
    for key, d in (("logical_error_per_cycle", a.distance), ("budget_logical_error_per_cycle", budget_distance)):
        if d is not None:
            iv[key] = _log_interval(_eps_at(a, d), math.hypot(s_e, (d - big_d) / 2 * s_l))
    rng = np.random.default_rng(0)
    lam = a.suppression * np.exp(s_l * rng.standard_normal(DRAWS))
    eps = a.eps_measured * np.exp(s_e * rng.standard_normal(DRAWS))
    with np.errstate(divide="ignore", invalid="ignore"):
        steps = np.log(eps / a.eps_target) / np.log(lam)
    dist = np.where(steps <= 0, big_d, big_d + 2 * np.ceil(steps - 1e-12))
    dist = np.where(lam > 1, np.maximum(dist, 3), np.inf)
    dist = np.where(dist > MAX_DISTANCE, np.inf, dist)
    reach = float(np.mean(np.isfinite(dist)))
    if a.distance is not None:
        q = (1 - CONFIDENCE) / 2
        lo, hi = np.quantile(dist, [q, 1 - q], method="inverted_cdf")
        lo, hi = min(float(lo), a.distance), max(float(hi), a.distance)
        iv["distance"] = Interval(low=lo, best=float(a.distance), high=hi)
        if math.isfinite(hi):
            iv["physical_qubits"] = Interval(low=float(physical_qubits(int(lo), code)),
                                             best=float(physical_qubits(a.distance, code)),
                                             high=float(physical_qubits(int(hi), code)))
    return {"suppression_sigma": suppression_sigma, "eps_sigma": eps_sigma, "intervals": iv,
            "reachable_fraction": reach}


def _calculate_point(*, suppression: float, eps: float, distance: int, eps_target: float) -> CalculatorAnswer:
    """:func:`calculate` for exact inputs, no budget."""
    if not (0 < suppression <= MAX_LAMBDA):
        raise InputError(f"{suppression!r} is not allowed: a suppression factor", field="suppression",
                         allowed=f"0 < Lambda <= {MAX_LAMBDA:g}")
    check_rate("eps", eps)
    check_rate("eps_target", eps_target)
    check_distance(distance)
    k = (distance + 1) / 2
    ln_lam = math.log(suppression)
    ln_prefactor = math.log(eps) + k * ln_lam
    if ln_prefactor > math.log(MAX_PREFACTOR):
        raise InputError(f"{eps:g} at distance {distance} with Lambda {suppression:g} is not "
                         f"allowed: it implies a prefactor A = eps * Lambda^((d+1)/2) = 10^"
                         f"{ln_prefactor / math.log(10):.0f}, above {MAX_PREFACTOR:g}; no device has that",
                         field="eps")
    prefactor = math.exp(ln_prefactor)
    # (A / eps_target)^(1/k) = Lambda * (eps / eps_target)^(1/k)
    required = math.exp(ln_lam + (math.log(eps) - math.log(eps_target)) / k)
    given = dict(suppression=suppression, eps_measured=eps, measured_distance=distance, eps_target=eps_target,
                 required_suppression=required, prefactor=prefactor)

    def unreachable(note: str) -> CalculatorAnswer:
        return CalculatorAnswer(**given, reachable=False, distance=None, physical_qubits=None,
                                logical_error_per_cycle=None, note=note)

    if suppression <= 1:
        return unreachable(f"not reachable: Lambda = {suppression:g} <= 1 means the device is "
                           "at or above threshold, so a larger code does not lower the error")
    steps = math.log(eps / eps_target) / ln_lam  # factors of Lambda needed beyond distance
    if distance + 2 * steps > MAX_DISTANCE + 2:
        return unreachable(f"not reachable: needs d = {distance + 2 * steps:.3g} or more, beyond "
                           f"{MAX_DISTANCE}, the largest planner answers for (Lambda = "
                           f"{suppression:.8g} is too close to 1 for this target)")
    d = max(3, distance + 2 * math.ceil(steps - 1e-12))
    if d % 2 == 0:
        d += 1

    def at(dd: int) -> float:  # eps at distance dd (A <= MAX_PREFACTOR keeps it finite)
        ln_step = -(dd - distance) / 2 * ln_lam
        return eps * suppression ** (-(dd - distance) / 2) if abs(ln_step) < 700 else \
            math.exp(math.log(eps) + ln_step)

    while d > 3 and at(d - 2) <= eps_target:  # guard against rounding at the boundary
        d -= 2
    while at(d) > eps_target * (1 + 1e-12):
        d += 2
    if d > MAX_DISTANCE:
        return unreachable(f"not reachable: needs a distance beyond {MAX_DISTANCE}, the largest "
                           "planner answers for")
    note = "goal already met at the measured distance" if eps <= eps_target else ""
    return CalculatorAnswer(**given, reachable=True, distance=d, physical_qubits=physical_qubits(d),
                            logical_error_per_cycle=at(d), note=note)
