"""Report files under the out directory: Markdown and CSV tables, fits.json, plots, report.html.

Every file is written to a temporary name in its own directory and moved into place with
``os.replace``, so a reader (or a crash) never sees half a file. A directory that cannot be
written raises :class:`~planner.errors.InputError` naming it.

Markdown is for people (the layout of :mod:`planner.reports.text`); CSV is for programs: one
header row, raw numbers at full precision, intervals as separate ``best``/``low``/``high``
columns, empty cells for missing values.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from planner.config import COMPONENTS, Target
from planner.errors import InputError
from planner.fits import CONFIDENCE, LIKELIHOOD_FACTOR, Interval
from planner.reports import text

REQUIREMENTS_COLUMNS = ("quantity", "lever", "unit", "best", "low", "high", "reachable",
                        "extrapolated", "note")
#: the figures of a sensitivity row, each written as best then ``_low`` / ``_high`` columns
SENSITIVITY_FIGURES = (("share_of_inverse_lambda", "share"), ("elasticity", "elasticity"),
                       ("suppression_factor_halved", "suppression_halved"),
                       ("suppression_factor_perfect", "suppression_perfect"),
                       ("months_earlier", "months_earlier"))
SENSITIVITY_COLUMNS = ("component", *(f"{name}{end}" for name, _ in SENSITIVITY_FIGURES
                                      for end in ("", "_low", "_high")), "lumped", "note")
DATES_COLUMNS = ("event", "date", "low", "high", "fraction_of_scenarios_reached")
VERIFY_COLUMNS = ("point", "quantity", "distance", "predicted", "predicted_low", "predicted_high",
                  "sampled", "sampled_low", "sampled_high", "zero_errors", "holds")
#: CSV columns (or requirements quantities) that are whole numbers: written as integers
INTEGER_COLUMNS = frozenset({"distance", "physical_qubits", "today_distance", "today_physical_qubits"})
VERIFY_FILES = ("verify.md", "verify.csv", "verify.json")
PLOTS_DIR = "plots"


# ---------------------------------------------------------------------------------------------
# atomic writes


def ensure_dir(directory: Path) -> Path:
    """Create ``directory`` (and parents); InputError naming it if that is impossible."""
    directory = Path(directory)
    try:
        directory.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise InputError(f"{directory}: cannot write reports: exists and is not a directory") from None
    except OSError as exc:
        raise InputError(f"{directory}: cannot write reports: {exc.strerror or exc}") from None
    if not directory.is_dir():
        raise InputError(f"{directory}: cannot write reports: not a directory")
    return directory


def write_atomic(path: Path, data: bytes | str) -> Path:
    """Write ``data`` to ``path`` via a temporary file in the same directory and ``os.replace``.

    The old file (if any) stays intact until the new one is complete; the temporary file is
    removed when anything fails.
    """
    path = Path(path)
    ensure_dir(path.parent)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    except OSError as exc:
        raise InputError(f"{path.parent}: cannot write reports: {_why(exc)}") from None
    try:
        try:
            os.fchmod(fd, 0o666 & ~_umask())  # mkstemp makes 0600; reports are ordinary files
            fh = os.fdopen(fd, "wb")
        except BaseException:
            os.close(fd)
            raise
        with fh:  # closing flushes: a full disk can fail there too, still inside this try
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        _remove_quietly(tmp)
        raise InputError(f"{path}: cannot write: {_why(exc)}") from None
    except BaseException:
        _remove_quietly(tmp)
        raise
    return path


def _why(exc: OSError) -> str:
    """What went wrong and, for a full disk or quota, what to do."""
    import errno

    why = exc.strerror or str(exc)
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        why += " (free some space, then run the command again: the sampled data is kept)"
    return why


def _umask() -> int:
    old = os.umask(0o022)
    os.umask(old)
    return old


def _remove_quietly(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:  # gone already, or the directory went away: nothing left to clean
        pass


# ---------------------------------------------------------------------------------------------
# CSV


def _cell(x: Any, *, integer: bool = False) -> Any:
    """CSV cell: missing and non-finite numbers become empty (never 'inf' or 'nan'); booleans as
    true/false; never '-0.0'; ``integer``: a whole float is written as an integer ('35', not
    '35.0')."""
    if x is None:
        return ""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        if not math.isfinite(x):
            return ""
        if x == 0:
            x = 0.0  # -0.0 -> 0.0
        if integer and x.is_integer() and abs(x) < 2**53:
            return int(x)
    return x


def _overflow_note(columns: Sequence[str], row: Sequence[Any]) -> str:
    """Names the cells left empty because their value is infinite (for the row's note)."""
    inf = [c for c, x in zip(columns, row) if isinstance(x, float) and math.isinf(x)]
    return f"{', '.join(inf)}: {text.BEYOND} (no finite value, left empty)" if inf else ""


def csv_text(columns: Sequence[str], rows: Iterable[Sequence[Any]], *,
             integer_rows: Sequence[bool] | None = None) -> str:
    """One header row then the rows (floats written at full precision by the csv module).

    Columns named in :data:`INTEGER_COLUMNS` (and every number of a row flagged in
    ``integer_rows``) are written as integers when whole. An infinite number is written empty;
    when there is a ``note`` column it says which cells overflowed.
    """
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    note_at = columns.index("note") if "note" in columns else None
    for i, r in enumerate(rows):
        if len(r) != len(columns):
            raise ValueError(f"row {r!r} does not have {len(columns)} cells")
        whole_row = bool(integer_rows[i]) if integer_rows is not None else False
        cells = [_cell(x, integer=whole_row or c in INTEGER_COLUMNS) for c, x in zip(columns, r)]
        if note_at is not None and (extra := _overflow_note(columns, r)):
            cells[note_at] = "; ".join(x for x in (cells[note_at], extra) if x)
        w.writerow(cells)
    return buf.getvalue()


def _iv(iv: Interval | None, best: float | None = None) -> tuple[Any, Any, Any]:
    if iv is None:
        return best, None, None
    return iv.best, iv.low, iv.high


def requirements_rows(req: Any, *, lambda_today_model: Interval | None = None) -> list[tuple[Any, ...]]:
    """Long format: one row per quantity (and lever), columns :data:`REQUIREMENTS_COLUMNS`;
    ``low``/``high`` are the bootstrap (model answers) or likelihood-ratio (fitted Lambda) ends,
    empty for inputs and for model values without an interval."""
    td = req.today
    model_lam = td.suppression_model_interval or lambda_today_model
    rows: list[tuple[Any, ...]] = [
        ("target_logical_error_per_cycle", "", "per cycle", req.eps_target, None, None, None, None, "goal"),
        ("distance", "", "", req.distance, None, None, None, None, req.distance_source),
        ("physical_qubits", "", "qubits", req.physical_qubits, None, None, None, None, req.qubit_rule),
        ("required_suppression_factor", "", "ratio",
         *_iv(req.required_suppression_interval, req.required_suppression), None, None,
         "with today's prefactor" + ("" if req.required_suppression_interval else f"; {text.POINT_VALUE}")),
        ("suppression_factor_today_fitted", "joint", "ratio", *_iv(td.suppression_fitted), None, None,
         "fitted at joint factor 1"),
        ("suppression_factor_today_model", "", "ratio", *_iv(model_lam, td.suppression_model),
         None, None, "response model"),
        ("today_logical_error_per_cycle", "", "per cycle",
         *_iv(td.logical_error_per_cycle_interval, td.logical_error_per_cycle), None, None,
         f"response model at distance {req.distance}"),
        ("today_distance", "", "", *_iv(td.distance_interval, td.distance), td.distance is not None,
         None, td.note),
        ("today_physical_qubits", "", "qubits", td.physical_qubits, None, None, td.within_max_qubits,
         None, f"within the budget of {td.max_qubits} qubits" if td.within_max_qubits else ""),
    ]
    for a in (req.joint, *req.components):
        rows.append(("factor_needed", a.lever, "x today's error", *_iv(a.factor_interval, a.factor),
                     a.reachable, bool(a.extrapolation),
                     "; ".join(x for x in (text.lever_note(a), *a.extrapolation) if x)))
        rows.append(("suppression_factor_reached", a.lever, "ratio", *_iv(a.suppression_interval, a.suppression),
                     a.reachable, bool(a.extrapolation),
                     "" if a.reachable else f"with {a.lever} perfect, the most it gives alone"))
    mix = req.mix
    for c, s in mix.scales.items():
        extrapolated = any(x.startswith(f"{c} ") for x in mix.extrapolation)
        h, h_iv = text.halvings(mix.scale_intervals.get(c), s)
        rows.append(("cheapest_mix_factor", c, "x today's error", *_iv(mix.scale_intervals.get(c), s),
                     mix.reachable, extrapolated, ""))
        rows.append(("cheapest_mix_halvings", c, "halvings (log2 of 1/factor)", *_iv(h_iv, h),
                     mix.reachable, extrapolated, ""))
        rows.append(("cheapest_mix_cost_share", c, "fraction of the cost",
                     *_iv(mix.cost_share_intervals.get(c), mix.cost_shares.get(c, 0.0)),
                     mix.reachable, extrapolated, ""))
    rows.append(("cheapest_mix_cost", "", "cost-weighted halvings", *_iv(mix.cost_interval, mix.cost),
                 mix.reachable, bool(mix.extrapolation), mix.note))
    rows.append(("cheapest_mix_suppression_factor", "", "ratio", *_iv(mix.suppression_interval, mix.suppression),
                 mix.reachable, bool(mix.extrapolation), ""))
    rows.append(("cheapest_mix_logical_error_per_cycle", "", "per cycle", mix.logical_error_per_cycle, None,
                 None, mix.reachable, bool(mix.extrapolation), "the goal: the mix is solved to meet it"))
    return rows


def roadmap_columns(rm: Any) -> tuple[str, ...]:
    """Steps of the roadmap: best values and their bootstrap ends (``eps_low_d<d>``,
    ``eps_high_d<d>``), empty ends without replica models."""
    return ("date", "years", *(f"scale_{c}" for c in COMPONENTS), "suppression_factor",
            "suppression_factor_low", "suppression_factor_high",
            *(f"{k}{d}" for d in rm.candidate_distances for k in ("eps_d", "eps_low_d", "eps_high_d")),
            "distance", "physical_qubits", "extrapolation")


def roadmap_rows(rm: Any) -> list[tuple[Any, ...]]:
    return [(s.date.isoformat(), s.years, *(s.scales[c] for c in COMPONENTS),
             *_iv(s.suppression_interval, s.suppression),
             *(x for d in rm.candidate_distances for x in _iv(s.eps_intervals.get(d), s.eps[d])),
             s.distance, s.physical_qubits, "; ".join(s.extrapolation)) for s in rm.steps]


def roadmap_date_rows(rm: Any) -> list[tuple[Any, ...]]:
    iso = lambda d: d.isoformat() if d else None  # noqa: E731
    return [(e.what, iso(e.date), iso(e.low), iso(e.high), e.fraction_reached if rm.num_scenarios else None)
            for e in (rm.goal, *rm.milestones)]


def sensitivity_rows(sens: Any, *, lumped: Sequence[str] = ()) -> list[tuple[Any, ...]]:
    return [(r.component, *(x for _, attr in SENSITIVITY_FIGURES
                            for x in _iv(r.intervals.get(attr), getattr(r, attr))),
             r.component in lumped, r.note) for r in sens.rows]


# ---------------------------------------------------------------------------------------------
# per-part writers (query commands call these directly)


def write_requirements(req: Any, out_dir: Path, *, lambda_today_model: Interval | None = None,
                       uncertainty: Any = None) -> list[Path]:
    """``requirements.md`` and ``requirements.csv`` (``req``: planning Requirements;
    ``uncertainty``: the bootstrap behind its intervals, for the replica count)."""
    out_dir = ensure_dir(out_dir)
    md = text.to_markdown(text.requirements_tables(req, lambda_today_model=lambda_today_model,
                                                   uncertainty=uncertainty),
                          heading="Requirements for the goal")
    rows = requirements_rows(req, lambda_today_model=lambda_today_model)
    whole = [r[0] in INTEGER_COLUMNS for r in rows]  # distances and qubits: '35', not '35.0'
    return [write_atomic(out_dir / "requirements.md", md),
            write_atomic(out_dir / "requirements.csv", csv_text(REQUIREMENTS_COLUMNS, rows, integer_rows=whole))]


def write_roadmap(rm: Any, out_dir: Path) -> list[Path]:
    """``roadmap.md``, ``roadmap.csv`` (steps) and ``roadmap_dates.csv`` (goal and milestones)."""
    out_dir = ensure_dir(out_dir)
    md = text.to_markdown(text.roadmap_tables(rm), heading="Roadmap")
    return [write_atomic(out_dir / "roadmap.md", md),
            write_atomic(out_dir / "roadmap.csv", csv_text(roadmap_columns(rm), roadmap_rows(rm))),
            write_atomic(out_dir / "roadmap_dates.csv", csv_text(DATES_COLUMNS, roadmap_date_rows(rm)))]


def write_sensitivity(sens: Any, out_dir: Path, *, lumped: Sequence[str] = ()) -> list[Path]:
    """``sensitivity.md`` and ``sensitivity.csv``; ``lumped``: components without their own axis."""
    out_dir = ensure_dir(out_dir)
    md = text.to_markdown(text.sensitivity_tables(sens, lumped=lumped), heading="Sensitivity")
    return [write_atomic(out_dir / "sensitivity.md", md),
            write_atomic(out_dir / "sensitivity.csv",
                         csv_text(SENSITIVITY_COLUMNS, sensitivity_rows(sens, lumped=lumped)))]


def fits_document(answers_or_report: Any, *, target: Target | None = None) -> dict[str, Any]:
    """The fits.json document: ``to_json()`` of an Answers (or a FitReport) with the target's
    identity and the confidence level; non-finite numbers become null."""
    doc = dict(answers_or_report.to_json())
    head: dict[str, Any] = {"confidence": CONFIDENCE, "likelihood_factor": LIKELIHOOD_FACTOR}
    if target is not None:
        head["target"] = {"name": target.name, "sha256": target.sha256, "device": target.device.name,
                          "goal_logical_error_per_cycle": target.goal.logical_error_per_cycle,
                          "goal_max_qubits": target.goal.max_qubits}
    head.update({k: v for k, v in doc.items() if k != "confidence"})
    return text.json_safe(head)


def write_fits(answers_or_report: Any, out_dir: Path, *, target: Target | None = None) -> list[Path]:
    """``fits.json``: every fitted figure with its interval (see :func:`fits_document`)."""
    out_dir = ensure_dir(out_dir)
    doc = fits_document(answers_or_report, target=target)
    return [write_atomic(out_dir / "fits.json", json.dumps(doc, indent=1, allow_nan=False) + "\n")]


def verify_rows(v: Any) -> list[tuple[Any, ...]]:
    """One row per (operating point, quantity, distance); ``distance`` empty for Lambda."""
    return [(r.label, r.quantity, r.distance, *_iv(r.predicted), *_iv(r.sampled), r.zero_errors, r.holds)
            for r in v.rows]


def write_verification(v: Any, out_dir: Path) -> list[Path]:
    """``verify.md``, ``verify.csv`` and ``verify.json`` (``v``: planning Verification)."""
    out_dir = ensure_dir(out_dir)
    md = text.to_markdown(text.verify_tables(v), heading="Verification on the simulator")
    doc = text.json_safe({"confidence": CONFIDENCE, **v.to_json()})
    return [write_atomic(out_dir / "verify.md", md),
            write_atomic(out_dir / "verify.csv", csv_text(VERIFY_COLUMNS, verify_rows(v))),
            write_atomic(out_dir / "verify.json", json.dumps(doc, indent=1, allow_nan=False) + "\n")]


def read_verification(out_dir: Path) -> Any:
    """The Verification in ``out_dir/verify.json`` (None when there is none); InputError naming
    the file when it is not one."""
    from planner.planning.verify import Verification

    path = Path(out_dir) / "verify.json"
    try:
        raw = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read: {exc}; delete it or run `planner verify` again") from None
    try:
        return Verification.from_json(json.loads(raw))
    except (ValueError, RecursionError) as exc:
        raise InputError(f"{path}: not a verification written by planner ({str(exc)[:200]}); "
                         "delete it or run `planner verify` again") from None


def write_plots(pngs: dict[str, bytes], out_dir: Path) -> list[Path]:
    """``plots/<name>.png`` for each rendered plot (see :func:`planner.reports.plots.render_all`)."""
    pdir = ensure_dir(Path(out_dir) / PLOTS_DIR)
    return [write_atomic(pdir / f"{name}.png", data) for name, data in pngs.items()]


def lambda_today_model(answers: Any) -> Interval | None:
    unc = answers.uncertainty
    return unc.intervals.get("lambda_today") if unc is not None else None


def write_all(answers: Any, *, out_dir: Path, target: Target, verification: Any = None) -> list[Path]:
    """Every report file for one set of answers; returns the paths written.

    Parts that do not exist are skipped (no roadmap section: no roadmap files; no model: only
    fits.json, the rate plot and the page, which says why). ``verification``: a fresh result of
    ``planner verify`` (its files are written too); without it, report.html takes its
    verification section from ``verify.json`` when that exists, and says so instead of showing
    numbers when it was made against an earlier fit.
    """
    from planner.reports import html, plots

    out_dir = ensure_dir(out_dir)
    written: list[Path] = []
    lam_model = lambda_today_model(answers)
    if answers.requirements is not None:
        written += write_requirements(answers.requirements, out_dir, lambda_today_model=lam_model,
                                      uncertainty=answers.uncertainty)
    if answers.roadmap is not None:
        written += write_roadmap(answers.roadmap, out_dir)
    if answers.sensitivity is not None:
        lumped = answers.model.unsampled if answers.model is not None else ()
        written += write_sensitivity(answers.sensitivity, out_dir, lumped=lumped)
    written += write_fits(answers, out_dir, target=target)
    pngs = plots.render_all(answers, target=target)
    written += write_plots(pngs, out_dir)
    if verification is not None:
        written += write_verification(verification, out_dir)
        verify_note = ""
    else:
        try:
            verification = read_verification(out_dir)
        except InputError as exc:  # a broken verify.json must not cost the rest of the report
            verification, verify_note = None, str(exc)
        else:
            verify_note = ""
            if verification is not None and not verification.is_current(answers):
                verification, verify_note = None, text.VERIFY_STALE
    page = html.report_html(answers, target=target, pngs=pngs, out_dir=out_dir,
                            verification=verification, verification_note=verify_note)
    written.append(write_atomic(out_dir / "report.html", page))
    return written
