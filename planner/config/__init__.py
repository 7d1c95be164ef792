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

import hashlib
import tomllib
from pathlib import Path

from pydantic import ValidationError

from planner.config.checks import check_consistency
from planner.config.limits import (
    COMPONENTS,
    ERROR_LIMITS,
    MAX_DETECTORS,
    MAX_DISTANCE,
    MAX_DISTANCES,
    MAX_NAME_LENGTH,
    MAX_PROBABILITY,
    MAX_QUBITS,
    MAX_SCALES,
    MAX_START,
    MAX_TARGET_BYTES,
    MAX_TASKS,
    MIN_START,
    coherence_problem,
    distance_problem,
    memory_circuit_size,
    size_problem,
)
from planner.config.messages import describe_validation_error
from planner.config.qubits import resolve_tables
from planner.config.schema import (
    PRESET_NATIVE_2Q,
    Coherence,
    Device,
    Durations,
    Errors,
    Goal,
    Preset,
    Rate,
    Roadmap,
    Sweep,
    Target,
)
from planner.errors import InputError

__all__ = [
    "COMPONENTS", "ERROR_LIMITS", "EXAMPLE_TOML", "MAX_DETECTORS", "MAX_DISTANCE", "MAX_DISTANCES",
    "MAX_NAME_LENGTH", "MAX_PROBABILITY", "MAX_QUBITS", "MAX_SCALES", "MAX_START", "MAX_TARGET_BYTES",
    "MAX_TASKS", "MIN_START", "PRESET_NATIVE_2Q", "Coherence", "Device", "Durations", "Errors", "Goal", "Preset", "Rate",
    "Roadmap", "Sweep", "Target", "coherence_problem", "distance_problem", "load_target",
    "memory_circuit_size", "parse_target", "size_problem",
]

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
        raise InputError(describe_validation_error(exc, doc, source)) from None
    target = target.model_copy(update={"source": source, "sha256": hashlib.sha256(data).hexdigest()})
    target = resolve_tables(target)  # per-qubit CSV tables, relative to the target file
    check_consistency(target, source)
    return target


