"""Report files under the out directory: Markdown and CSV tables, fits.json, plots, report.html.

Every file is written with :func:`planner.store.fileio.atomic_write` (a temporary name in its own
directory, moved into place), so a reader (or a crash) never sees half a file. A directory that
cannot be written raises :class:`~planner.errors.InputError` naming it.

Markdown is for people (the tables of :mod:`planner.reports.text`); CSV is for programs (the
tables of :mod:`planner.reports.csvtables`): both are :class:`~planner.reports.table.Table`
values, rendered by :func:`~planner.reports.table.to_markdown` and
:func:`~planner.reports.table.to_csv`.
"""

from __future__ import annotations

import errno
import json
import os  # noqa: F401  (tests inject disk faults through files.os)
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from planner.config import Target
from planner.errors import InputError
from planner.store.fileio import atomic_write
from planner.fits import CONFIDENCE, LIKELIHOOD_FACTOR, FitReport, Interval
from planner.reports import text
from planner.reports.csvtables import (  # noqa: F401  (re-exported: the CSV columns users read)
    DATES_COLUMNS,
    REQUIREMENTS_COLUMNS,
    SENSITIVITY_COLUMNS,
    SENSITIVITY_FIGURES,
    csv_files,
    requirements_csv,
    requirements_rows,
    roadmap_columns,
    roadmap_csv,
    roadmap_date_rows,
    roadmap_rows,
    sensitivity_csv,
    sensitivity_rows,
)
from planner.reports.verifyreport import VERIFY_COLUMNS  # noqa: F401  (the CSV columns users read)
from planner.reports.jsondoc import json_file_text, json_safe
from planner.reports.text import lambda_today_model, lumped_components  # noqa: F401  (cli ask uses files.lambda_today_model)
from planner.reports.table import INTEGER_COLUMNS, Table, csv_text, to_csv, to_markdown  # noqa: F401
from planner.reports.table import csv_cell as _cell  # noqa: F401  (the name tests use)

if TYPE_CHECKING:
    from planner.planning import Answers, Requirements, Roadmap, Sensitivity, Uncertainty
    from planner.planning.verify import Verification

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


def report_write_error(path: Path, exc: OSError, *, what: str = "") -> InputError:
    """The one-line error for a report file that could not be written (for a full disk or
    quota: what to do; the sampled data is never at stake).

    >>> str(report_write_error(Path("o/a.csv"), OSError(errno.ENOSPC, "No space left on device")))
    'o/a.csv: cannot write: No space left on device (free some space, then run the command again: the sampled data is kept)'
    """
    why = exc.strerror or str(exc)
    if exc.errno in (errno.ENOSPC, errno.EDQUOT):
        why += " (free some space, then run the command again: the sampled data is kept)"
    return InputError(f"{path}: cannot write: {why}")


def write_atomic(path: Path, data: bytes | str) -> Path:
    """Write ``data`` (text as UTF-8) to ``path`` through :func:`planner.store.fileio.atomic_write`,
    creating its directory; the old file (if any) stays intact until the new one is complete."""
    path = Path(path)
    ensure_dir(path.parent)
    atomic_write(path, data.encode("utf-8") if isinstance(data, str) else data, error=report_write_error)
    return path


# ---------------------------------------------------------------------------------------------
# per-part writers (query commands call these directly)


def write_tables(out_dir: Path, markdown: tuple[str, str] | None, csvs: Sequence[tuple[str, Table]]) -> list[Path]:
    """``markdown``: (file name, document); ``csvs``: (file name, table of raw values)."""
    out_dir = ensure_dir(out_dir)
    written = [write_atomic(out_dir / markdown[0], markdown[1])] if markdown else []
    return written + [write_atomic(out_dir / name, to_csv(t)) for name, t in csvs]


def write_stage(stage: str, tables: Sequence[Table], csvs: Sequence[tuple[str, Table]], out_dir: Path) -> list[Path]:
    """One stage's Markdown file (:data:`planner.reports.text.MARKDOWN_FILES`) and CSV files."""
    name, heading = text.MARKDOWN_FILES[stage]
    return write_tables(out_dir, (name, to_markdown(tables, heading=heading)), csvs)


def write_requirements(req: Requirements, out_dir: Path, *, lambda_today_model: Interval | None = None,
                       uncertainty: Uncertainty | None = None) -> list[Path]:
    """``requirements.md`` and ``requirements.csv`` (``uncertainty``: the bootstrap behind the
    intervals, for the replica count)."""
    tables = text.requirements_tables(req, lambda_today_model=lambda_today_model, uncertainty=uncertainty)
    return write_stage("requirements", tables, csv_files(req, lambda_today_model=lambda_today_model), out_dir)


def write_roadmap(rm: Roadmap, out_dir: Path) -> list[Path]:
    """``roadmap.md``, ``roadmap.csv`` (steps) and ``roadmap_dates.csv`` (goal and milestones)."""
    return write_stage("roadmap", text.roadmap_tables(rm), csv_files(rm), out_dir)


def write_sensitivity(sens: Sensitivity, out_dir: Path, *, lumped: Sequence[str] = ()) -> list[Path]:
    """``sensitivity.md`` and ``sensitivity.csv``; ``lumped``: components without their own axis."""
    return write_stage("sensitivity", text.sensitivity_tables(sens, lumped=lumped),
                       csv_files(sens, lumped=lumped), out_dir)


def fits_document(answers_or_report: Answers | FitReport, *, target: Target | None = None) -> dict[str, Any]:
    """The fits.json document: ``to_json()`` of an Answers (or a FitReport) with the target's
    identity and the confidence level; non-finite numbers become null."""
    doc = dict(answers_or_report.to_json())
    head: dict[str, Any] = {"confidence": CONFIDENCE, "likelihood_factor": LIKELIHOOD_FACTOR}
    if target is not None:
        head["target"] = {"name": target.name, "sha256": target.sha256, "device": target.device.name,
                          "goal_logical_error_per_cycle": target.goal.logical_error_per_cycle,
                          "goal_max_qubits": target.goal.max_qubits}
    head.update({k: v for k, v in doc.items() if k != "confidence"})
    return json_safe(head)


def write_fits(answers_or_report: Answers | FitReport, out_dir: Path, *, target: Target | None = None) -> list[Path]:
    """``fits.json``: every fitted figure with its interval (see :func:`fits_document`)."""
    out_dir = ensure_dir(out_dir)
    return [write_atomic(out_dir / "fits.json", json_file_text(fits_document(answers_or_report, target=target)))]


def write_verification(v: Verification, out_dir: Path) -> list[Path]:
    """``verify.md``, ``verify.csv`` and ``verify.json``."""
    from planner.reports import verifyreport

    md = to_markdown(verifyreport.verify_tables(v), heading="Verification on the simulator")
    written = write_tables(out_dir, ("verify.md", md), [("verify.csv", verifyreport.verify_csv(v))])
    doc = {"confidence": CONFIDENCE, **v.to_json()}
    return [*written, write_atomic(Path(out_dir) / "verify.json", json_file_text(doc))]


def read_verification(out_dir: Path) -> Verification | None:
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


def _saved_verification(answers: Answers, out_dir: Path) -> tuple[Verification | None, str]:
    """The verification in ``out_dir/verify.json`` for the page, or what the page says instead
    (it is broken, or it was made against an earlier fit)."""
    try:
        verification = read_verification(out_dir)
    except InputError as exc:  # a broken verify.json must not cost the rest of the report
        return None, str(exc)
    if verification is not None and not verification.is_current(answers):
        return None, text.VERIFY_STALE
    return verification, ""


def write_all(answers: Answers, *, out_dir: Path, target: Target,
              verification: Verification | None = None) -> list[Path]:
    """Every report file for one set of answers; returns the paths written.

    Parts that do not exist are skipped (no roadmap section: no roadmap files; no model: only
    fits.json, the rate plot and the page, which says why). ``verification``: a fresh result of
    ``planner verify`` (its files are written too); without it, report.html takes its
    verification section from ``verify.json`` when that exists, and says so instead of showing
    numbers when it was made against an earlier fit.
    """
    from planner.reports import html, plots

    out_dir = ensure_dir(out_dir)
    tables = text.report_tables(answers)
    parts = {"requirements": answers.requirements, "roadmap": answers.roadmap, "sensitivity": answers.sensitivity}
    written: list[Path] = []
    for stage, result in parts.items():
        if result is not None:
            csvs = csv_files(result, lambda_today_model=lambda_today_model(answers), lumped=lumped_components(answers))
            written += write_stage(stage, tables[stage], csvs, out_dir)
    written += write_fits(answers, out_dir, target=target)
    pngs = plots.render_all(answers, target=target)
    written += write_plots(pngs, out_dir)
    if verification is not None:
        written += write_verification(verification, out_dir)
        verify_note = ""
    else:
        verification, verify_note = _saved_verification(answers, out_dir)
    page = html.report_html(answers, target=target, pngs=pngs, out_dir=out_dir, tables=tables,
                            verification=verification, verification_note=verify_note)
    written.append(write_atomic(out_dir / "report.html", page))
    return written
