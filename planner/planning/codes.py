"""Codes planner plans for and how many physical qubits a distance-d patch of each uses."""

from __future__ import annotations

import math

from planner.errors import InputError

#: the codes planner plans for, and how many physical qubits a distance-d patch of each uses
CODES = ("surface", "repetition")


def _check_code(code: str) -> None:
    if code not in CODES:
        raise InputError(f"{code!r} is not a code planner plans for", field="code", allowed=", ".join(CODES))


def physical_qubits(distance: int, code: str = "surface") -> int:
    """Physical qubits of one distance-``distance`` memory: ``2 d^2 - 1`` for the rotated surface
    code (d^2 data + d^2 - 1 measure qubits; Google Quantum AI, Nature 638, 920 (2025)), ``2 d - 1``
    for the repetition code (d data + d - 1 measure qubits, common practice).

    >>> physical_qubits(7), physical_qubits(7, "repetition")
    (97, 13)
    """
    _check_code(code)
    return 2 * distance - 1 if code == "repetition" else 2 * distance * distance - 1


def qubit_rule(code: str = "surface") -> str:
    """The qubit count of :func:`physical_qubits` as a short formula for tables.

    >>> qubit_rule(), qubit_rule("repetition")
    ('2d^2-1', '2d-1')
    """
    _check_code(code)
    return "2d-1" if code == "repetition" else "2d^2-1"


def largest_distance_within(qubits: int, code: str = "surface") -> int | None:
    """Largest odd d >= 3 with ``physical_qubits(d, code) <= qubits`` (None if even d = 3 does not
    fit).

    >>> largest_distance_within(97), largest_distance_within(96), largest_distance_within(10)
    (7, 5, None)
    >>> largest_distance_within(13, "repetition"), largest_distance_within(12, "repetition")
    (7, 5)
    """
    _check_code(code)
    qubits = int(qubits)
    if code == "repetition":
        d = (qubits + 1) // 2
    else:
        d = int(math.isqrt(max(qubits + 1, 0) // 2))
    if d % 2 == 0:
        d -= 1
    while d >= 3 and physical_qubits(d, code) > qubits:
        d -= 2
    return d if d >= 3 else None
