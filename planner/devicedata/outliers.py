"""Where the data and the calibrated model disagree: stabilizers whose detection rate differs
beyond its bootstrap spread, pairs the model says are independent but the data shows correlated,
and measured logical error rates (per distance or per sub-patch, from a small CSV) that differ
from the model's prediction, each in sigma.
"""

from __future__ import annotations

import csv
import dataclasses
import math
from pathlib import Path

import numpy as np

from planner.devicedata.model import CLASSES, DetectorLayout
from planner.devicedata.stats import DetectorCounts, pair_probability
from planner.errors import InputError

__all__ = ["LogicalPoint", "StabilizerRow", "UnexpectedPair", "log_sigma", "read_logical_csv",
           "stabilizer_rows", "unexpected_pairs"]


@dataclasses.dataclass(frozen=True)
class StabilizerRow:
    """One stabilizer: its coordinates, type, mean detection probability over its detectors in
    the data and in the model, and (data - model) in bootstrap sigmas."""

    xy: tuple[float, float]
    kind: str
    data: float
    model: float
    sigma: float


def stabilizer_rows(counts: DetectorCounts, layout: DetectorLayout, model_detection: np.ndarray, *,
                    draws: int = 200, seed: int = 1) -> list[StabilizerRow]:
    w = counts.bootstrap_weights(draws=draws, seed=seed)
    boot = (w @ counts.singles) / (w @ counts.shots)[:, None]
    data = counts.detection_probability()
    rows = []
    for xy in layout.stabilizers():
        idx = np.nonzero(np.all(layout.xy == np.array(xy), axis=1))[0]
        spread = float(boot[:, idx].mean(axis=1).std())
        diff = float(data[idx].mean() - model_detection[idx].mean())
        rows.append(StabilizerRow(xy=(float(xy[0]), float(xy[1])), kind=str(layout.kind[idx[0]]),
                                  data=float(data[idx].mean()), model=float(model_detection[idx].mean()),
                                  sigma=diff / spread if spread > 0 else 0.0))
    return rows


@dataclasses.dataclass(frozen=True)
class UnexpectedPair:
    """Two detectors no single mechanism of the model flips together, yet correlated."""

    i: int
    j: int
    p: float
    sigma: float


def unexpected_pairs(counts: DetectorCounts, classes: np.ndarray, *, threshold: float) -> list[UnexpectedPair]:
    """Pairs of class ``unexpected`` whose p_ij stands ``threshold`` sigma above zero, largest
    first. sigma is the spread p_ij would have if the two were independent: the sample
    covariance's sqrt(P_i (1 - P_i) P_j (1 - P_j) / N) over (1 - 2 P_i)(1 - 2 P_j)."""
    i, j = np.nonzero(np.triu(classes == CLASSES.index("unexpected"), 1))
    if len(i) == 0:
        return []
    n, s, c = counts.total()
    pi, pj = s[i] / n, s[j] / n
    p = pair_probability(pi, pj, c[i, j] / n)
    with np.errstate(divide="ignore", invalid="ignore"):
        spread = np.sqrt(pi * (1 - pi) * pj * (1 - pj) / n) / np.abs((1 - 2 * pi) * (1 - 2 * pj))
    z = np.where(spread > 0, p / np.where(spread > 0, spread, 1), 0.0)
    keep = np.nonzero(z >= threshold)[0]
    keep = keep[np.argsort(-z[keep])]
    return [UnexpectedPair(i=int(i[k]), j=int(j[k]), p=float(p[k]), sigma=float(z[k])) for k in keep]


@dataclasses.dataclass(frozen=True)
class LogicalPoint:
    """One measured logical error rate: ``label`` (a distance or a sub-patch), ``distance``,
    ``rounds``, ``shots``, ``errors`` (logical failures after ``rounds`` rounds)."""

    label: str
    distance: int
    rounds: int
    shots: int
    errors: int


_COLUMNS = ("distance", "shots", "errors")


def read_logical_csv(path: str | Path, *, default_rounds: int | None = None) -> list[LogicalPoint]:
    """Rows ``distance,shots,errors`` (optional ``rounds``, default the distance; optional
    ``label``, default ``d=<distance>``)."""
    src = str(path)
    try:
        with open(path, newline="") as f:
            rows = list(csv.DictReader(f))
    except FileNotFoundError:
        raise InputError("no such file", source=src) from None
    except UnicodeDecodeError:
        raise InputError("not UTF-8 text", source=src) from None
    if not rows:
        raise InputError("no rows: give a header distance,shots,errors[,rounds][,label] and one row "
                         "per measured point", source=src)
    missing = [c for c in _COLUMNS if c not in rows[0]]
    if missing:
        raise InputError(f"missing column(s) {', '.join(missing)}", source=src,
                         allowed="columns distance, shots, errors, optional rounds and label")
    return [_logical_row(row, n, src, default_rounds) for n, row in enumerate(rows, start=2)]


def _logical_row(row: dict, n: int, src: str, default_rounds: int | None) -> LogicalPoint:
    try:
        d, shots, errors = (int(str(row[c]).strip()) for c in _COLUMNS)
        r = int(str(row.get("rounds") or "").strip() or default_rounds or d)
    except ValueError:
        raise InputError(f"line {n}: distance, shots, errors and rounds must be integers", source=src) from None
    if d < 3 or shots < 1 or not 0 <= errors <= shots or r < 1:
        raise InputError(f"line {n}: need distance >= 3, rounds >= 1, shots >= 1 and 0 <= errors <= shots",
                         source=src)
    return LogicalPoint(label=(row.get("label") or "").strip() or f"d={d}", distance=d, rounds=r,
                        shots=shots, errors=errors)


def log_sigma(*, errors: int) -> float:
    """Spread of ln(rate) from a binomial count (1/sqrt(errors); one decade-ish for none).

    >>> log_sigma(errors=100)
    0.1
    """
    return 1.0 / math.sqrt(errors) if errors > 0 else 1.0
