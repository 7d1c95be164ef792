"""Calculator mode: distance and qubits from measured numbers, no sampling.

From a measured Lambda and a measured logical error per cycle ``eps_D`` at distance D, the
ansatz eps_d = A * Lambda^(-(d+1)/2) (Google Quantum AI, Nature 638, 920 (2025), eq. 1) gives
eps_d = eps_D * Lambda^(-(d-D)/2) and A = eps_D * Lambda^((D+1)/2); a rotated surface code of
distance d needs 2 d^2 - 1 physical qubits (same paper).

>>> a = calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6)
>>> a.distance, a.physical_qubits, a.logical_error_per_cycle
(25, 1249, 9.765625e-07)
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from planner.errors import InputError
from planner.planning.limits import MAX_DISTANCE, check_distance, check_rate
from planner.planning.model import physical_qubits


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
                "target_logical_error_per_cycle": self.eps_target, "note": self.note}


#: largest measured Lambda taken: the ansatz has only been checked near threshold (Lambda of a
#: few), and a factor above this says more about the input than about a device
MAX_LAMBDA = 1000.0
#: largest prefactor A = eps_D * Lambda^((D+1)/2) taken: eps_1 = A / Lambda is at most 1/2 on any
#: device, so an A this large means the three numbers do not belong together
MAX_PREFACTOR = 1e300


def calculate(*, suppression: float, eps: float, distance: int, eps_target: float) -> CalculatorAnswer:
    """Smallest odd distance meeting ``eps_target`` from a measured Lambda and eps at ``distance``.

    Works in logarithms, so no intermediate overflows; a distance beyond
    :data:`~planner.planning.limits.MAX_DISTANCE` is "not reachable" (exit 0), inputs out of range
    raise :class:`~planner.errors.InputError`.
    """
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
