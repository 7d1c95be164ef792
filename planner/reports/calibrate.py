"""Reports of ``planner calibrate``: the fitted excess, outliers, detection probability by round
and by stabilizer type, pair probabilities by class, the staged comparison of the logical error
per cycle; written as ``calibrate.md``, CSV files, ``calibrate.json``, plots, and the
calibrated target ``calibrated.toml``."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from planner.devicedata import CLASSES
from planner.reports.files import ensure_dir, write_atomic
from planner.reports.formats import interval, num, span
from planner.reports.jsondoc import json_file_text
from planner.reports.table import Table, to_csv, to_markdown

if TYPE_CHECKING:
    from planner.jobs.calibrate import Calibration

__all__ = ["calibration_tables", "write_calibration"]

CALIBRATED_FILE = "calibrated.toml"


def _xy(xy: object) -> str:
    x, y = xy  # type: ignore[misc]
    return f"{x:g},{y:g}"


def component_table(cal: Calibration) -> Table:
    rows = []
    for c in cal.fit.components:
        k = cal.keys[c.name]
        rows.append((c.name, k.key, num(k.today), span(c.best * k.factor, c.low * k.factor, c.high * k.factor),
                     num(k.today + c.best * k.factor)))
    return Table(title="Fitted excess error per component", key="components",
                 headers=("component", "target key", "today", "fitted excess [95%]", "calibrated"),
                 rows=rows, left=(0, 1),
                 lead=[f"{cal.num_shots} shots of {cal.source}, d={cal.distance}, {cal.rounds} rounds, basis "
                       f"{cal.basis}; {cal.fit.num_quantities} detection and pair probabilities fitted "
                       f"(reduced chi-square {num(cal.fit.reduced_chi2)})."],
                 notes=["Excess in the target file's units (a probability; an infidelity where the target "
                        "gives one); intervals: bootstrap over batches of shots (sampling only)",
                        "a reduced chi-square well above 1 means no excess of these components makes the "
                        "model match: look at the outliers and the unexpected pairs"])


def outlier_table(cal: Calibration) -> Table:
    rows = [(_xy(o["qubit"]), o["kind"], o.get("role", "—"), num(o["sigma"]), _detail(o)) for o in cal.outliers()]
    rows += [(c.point.label, "logical", "—", num(c.sigma),
              f"per cycle {interval(c.measured, is_rate=True)} vs model {interval(c.model, is_rate=True)}")
             for c in cal.logical_outliers()]
    return Table(title="Outliers (beyond the calibrated model)", key="outliers",
                 headers=("qubit", "kind", "role", "sigma", "detail"), rows=rows, left=(0, 1, 2, 4),
                 lead=[f"Threshold {num(cal.threshold)} sigma (bootstrap). A qubit: extra error on that "
                       "qubit alone explains the residual (fitted as depolarizing in every layer, readout "
                       "and single-qubit gate error); a stabilizer: its mean detection probability differs "
                       "from the calibrated model; a logical point: a measured logical error rate differs "
                       "from the calibrated model's (3 sigma)."] if rows else
                 [f"No qubit or stabilizer beyond {num(cal.threshold)} sigma."])


def _detail(o: dict) -> str:
    if o["kind"] == "qubit":
        e = o["excess_depolarizing_per_layer"]
        kinds = (("depolarizing/layer", e), ("readout", o["excess_readout"]), ("gate_1q", o["excess_gate_1q"]))
        # the excess whose interval excludes zero (else the largest): the rest is in calibrate.json
        shown = [(n, v) for n, v in kinds if v["low"] > 0] or [max(kinds, key=lambda k: k[1]["best"])]
        return "; ".join(f"+{n} {span(v['best'], v['low'], v['high'])}" for n, v in shown)
    return f"{o['type']} stabilizer: detection {num(o['detection_data'])} vs model {num(o['detection_model'])}"


def round_rows(cal: Calibration) -> list[tuple[int, str, float, float, float]]:
    """(round, stabilizer type, data, first principles, calibrated): mean detection probability."""
    out = []
    lay = cal.layout
    for kind in sorted(set(lay.kind.tolist())):
        for r in sorted(set(lay.round.tolist())):
            idx = np.nonzero((lay.kind == kind) & (lay.round == r))[0]
            if len(idx):
                out.append((int(r), str(kind), float(cal.data_detection[idx].mean()),
                            float(cal.model_detection[idx].mean()), float(cal.cal_detection[idx].mean())))
    return out


def round_table(cal: Calibration) -> Table:
    rows = [(str(r), k, num(d), num(m), num(c)) for r, k, d, m, c in round_rows(cal)]
    return Table(title="Detection probability by round and stabilizer type", key="rounds",
                 headers=("round", "type", "data", "first principles", "calibrated"), rows=rows, left=(1,),
                 notes=[f"Mean over the stabilizers of each type; the last round ({cal.rounds}) is built "
                        "from the data qubits' final readout; model values are exact (detector error model)"])


def class_rows(cal: Calibration) -> list[tuple[str, int, float, float, float]]:
    """(class, pairs, data, first principles, calibrated): mean p_ij per class."""
    iu = np.triu_indices(len(cal.layout.round), 1)
    cls = cal.classes[iu]
    out = []
    for k, name in enumerate(CLASSES):
        sel = cls == k
        if sel.any():
            out.append((name, int(sel.sum()), float(np.nanmean(cal.data_pairs[iu][sel])),
                        float(cal.model_pairs[iu][sel].mean()), float(cal.cal_pairs[iu][sel].mean())))
    return out


def class_table(cal: Calibration) -> Table:
    rows = [(n, str(c), num(d), num(m), num(k)) for n, c, d, m, k in class_rows(cal)]
    notes = ["p_ij estimator: Spitz et al., arXiv:1712.02360; classes as in Google Quantum AI, Nature 614, "
             "676 (2023); 'unexpected': no single mechanism of the model flips both"]
    if cal.unexpected:
        u = cal.unexpected[0]
        notes.append(f"{len(cal.unexpected)} unexpected pair(s) correlated beyond {num(cal.threshold)} sigma; the "
                     f"strongest: stabilizers {_xy(cal.layout.xy[u.i])} (round {cal.layout.round[u.i]}) and "
                     f"{_xy(cal.layout.xy[u.j])} (round {cal.layout.round[u.j]}), p = {num(u.p)}, {num(u.sigma)} sigma")
    return Table(title="Pair probability p_ij by class (mean over pairs)", key="pairs",
                 headers=("class", "pairs", "data", "first principles", "calibrated"), rows=rows, notes=notes)


def stage_table(cal: Calibration) -> Table:
    m = cal.measured
    rows = [(s.name, num(s.shots), interval(s.eps, is_rate=True),
             num(s.eps.best / m.best) if (s.eps and m and m.best > 0) else "—") for s in cal.stages]
    lead = [f"Measured (decoded by pymatching with the calibrated model and its outlier qubits): "
            f"{interval(m, is_rate=True)} per cycle "
            f"({cal.measured_counts[1]} failures in {cal.measured_counts[0]} shots)." if m else
            "No observable flips were given: the measured logical error per cycle is unknown."]
    if not cal.stages:
        lead.append("Stages not sampled (run without --no-stages to sample them).")
    return Table(title="Staged comparison: logical error per cycle", key="stages",
                 headers=("model", "shots", "logical error per cycle [95%]", "model / measured"),
                 rows=rows, lead=lead,
                 notes=["Each stage adds one fitted excess to the one above it (largest first), sampled "
                        "with the target's decoder at the measured distance and rounds; a last stage adds the outlier "
                        "qubits' fitted excess (the calibrated target file cannot hold it today)"])


def logical_table(cal: Calibration) -> Table | None:
    if not cal.logical:
        return None
    rows = [(c.point.label, str(c.point.distance), str(c.point.rounds), interval(c.measured, is_rate=True),
             interval(c.model, is_rate=True), num(c.sigma)) for c in cal.logical]
    return Table(title="Measured logical error per cycle against the calibrated model", key="logical",
                 headers=("point", "distance", "rounds", "measured", "calibrated model", "sigma"), rows=rows,
                 notes=["sigma: ln(measured / model) over the two counts' spreads (1/sqrt(failures) each); "
                        "beyond 3 is flagged as an outlier: question it before it is celebrated"])


def calibration_tables(cal: Calibration) -> list[Table]:
    tables = [component_table(cal), outlier_table(cal), stage_table(cal), logical_table(cal),
              round_table(cal), class_table(cal)]
    return [t for t in tables if t is not None]


def csv_tables(cal: Calibration) -> list[tuple[str, Table]]:
    comp = Table(title="components", headers=("component", "key", "today", "best", "low", "high", "calibrated"),
                 rows=[(n, v["key"], v["today"], v["best"], v["low"], v["high"], v["calibrated"])
                       for n, v in cal.components_json().items()])
    stab = Table(title="stabilizers", headers=("x", "y", "type", "data", "model", "sigma"),
                 rows=[(s.xy[0], s.xy[1], s.kind, s.data, s.model, s.sigma) for s in cal.stabilizers])
    det = Table(title="detectors", headers=("detector", "x", "y", "round", "type", "data", "first_principles",
                                            "calibrated"),
                rows=[(k, float(cal.layout.xy[k, 0]), float(cal.layout.xy[k, 1]), int(cal.layout.round[k]),
                       str(cal.layout.kind[k]), float(cal.data_detection[k]), float(cal.model_detection[k]),
                       float(cal.cal_detection[k])) for k in range(len(cal.layout.round))])
    stages = Table(title="stages", headers=("stage", "shots", "errors", "best", "low", "high"),
                   rows=[(s.name, s.shots, s.errors, *((s.eps.best, s.eps.low, s.eps.high) if s.eps else
                                                       (None, None, None))) for s in cal.stages])
    return [("calibrate_components.csv", comp), ("calibrate_stabilizers.csv", stab),
            ("calibrate_detectors.csv", det), ("calibrate_stages.csv", stages)]


def write_calibration(cal: Calibration, out_dir: Path, *, plots: bool = True) -> list[Path]:
    """Every file of the calibration under ``out_dir`` (created); returns the paths written."""
    out_dir = ensure_dir(Path(out_dir))
    written = [write_atomic(out_dir / CALIBRATED_FILE, cal.calibrated_toml),
               write_atomic(out_dir / "calibrate.md", to_markdown(calibration_tables(cal),
                                                                  heading="Calibration against measured data")),
               write_atomic(out_dir / "calibrate.json", json_file_text(cal.to_json()))]
    written += [write_atomic(out_dir / name, to_csv(t)) for name, t in csv_tables(cal)]
    if plots:
        from planner.reports.calibrate_plots import calibration_plots

        for name, data in calibration_plots(cal, rounds=round_rows(cal), classes=class_rows(cal)).items():
            written.append(write_atomic(out_dir / "plots" / name, data))
    return written
