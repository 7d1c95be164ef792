"""Device data: measured detection events against the model.

``events`` (stim's result formats in and out), ``stats`` (detection and pair probabilities from
counts over shots), ``model`` (the layout of a circuit's detectors, the exact statistics of a
detector error model, pair classes), ``fit`` (excess error per component and bad qubits),
``calibrated`` (the calibrated target file), ``outliers`` (stabilizers, pairs and logical rates
that disagree). Nothing here samples a sweep; the calibrate job combines these with sampling.
"""

from planner.devicedata.calibrated import TargetKey, calibrated_text, target_key
from planner.devicedata.events import FORMATS, Events, iter_chunks, obs_path_for, read_events, write_events
from planner.devicedata.fit import (
    DEFAULT_COMPONENTS,
    EXCESS_FIELD,
    ComponentFit,
    ExcessFit,
    Measured,
    QubitOutlier,
    dem_of,
    fit_excess,
    measure,
    with_excess,
)
from planner.devicedata.model import (
    CLASSES,
    DetectorLayout,
    Expectation,
    classify_pairs,
    expectation,
    layout_of,
    with_qubit_noise,
)
from planner.devicedata.outliers import (
    LogicalPoint,
    StabilizerRow,
    UnexpectedPair,
    log_sigma,
    read_logical_csv,
    stabilizer_rows,
    unexpected_pairs,
)
from planner.devicedata.stats import DetectorCounts, count_events, pair_probability, to_additive

__all__ = ["CLASSES", "DEFAULT_COMPONENTS", "EXCESS_FIELD", "FORMATS", "ComponentFit", "DetectorCounts",
           "DetectorLayout", "Events", "ExcessFit", "Expectation", "LogicalPoint", "Measured", "QubitOutlier",
           "StabilizerRow", "TargetKey", "UnexpectedPair", "calibrated_text", "classify_pairs", "count_events",
           "dem_of", "expectation", "fit_excess", "iter_chunks", "layout_of", "log_sigma", "measure",
           "obs_path_for", "pair_probability", "read_events", "read_logical_csv", "stabilizer_rows",
           "target_key", "to_additive", "unexpected_pairs", "with_excess", "with_qubit_noise", "write_events"]
