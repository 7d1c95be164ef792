"""The limits of a target: the components and their probability ranges, and what one machine
can build and sample. Each check here is the one implementation of it."""

from __future__ import annotations

import datetime as _dt

#: The named hardware components. Every answer planner gives is stated as a scale factor on
#: these (1 = today, 0.5 = half today's error, 0 = perfect).
COMPONENTS: tuple[str, ...] = ("gate_1q", "gate_2q", "readout", "reset", "idle", "idle_measure", "leakage")

#: Largest meaningful probability per component: the point where the channel is fully mixing
#: (DEPOLARIZE1 3/4, DEPOLARIZE2 15/16, a classical flip 1/2).
MAX_PROBABILITY: dict[str, float] = {
    "gate_1q": 0.75,
    "gate_2q": 15 / 16,
    "readout": 0.5,
    "reset": 0.5,
    "idle": 0.75,
    "idle_measure": 0.75,
    "leakage": 1.0,  # leakage probabilities (see planner.config.leakage), capped at 1 when scaled
}

#: Largest value of each ``device.errors`` key: the probabilities above (full mixing); the
#: average gate infidelities that convert to them (r = p D / (D + 1), D = 2**qubits); the idle
#: excesses, DEPOLARIZE1 probabilities like ``idle``.
ERROR_LIMITS: dict[str, float] = {
    **{k: MAX_PROBABILITY[k] for k in ("gate_1q", "gate_2q", "readout", "reset")},
    "gate_1q_infidelity": MAX_PROBABILITY["gate_1q"] * 2 / 3,
    "gate_2q_infidelity": MAX_PROBABILITY["gate_2q"] * 4 / 5,
    "idle_excess": MAX_PROBABILITY["idle"],
    "idle_measure_excess": MAX_PROBABILITY["idle_measure"],
}


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
#: Most round counts per distance (``sweep.round_multiples``): a decay fit needs two or three.
MAX_ROUND_COUNTS = 4
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


