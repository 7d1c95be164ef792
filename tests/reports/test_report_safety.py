"""Hardening of the report files, the verify output and the cosmetics (issue 9).

Most tests plan from synthetic counts (tests.helpers.synthetic: binomial draws from a known
model), so they take seconds; the CLI tests share one tiny real sweep (two distances, one basis,
two joint points, the 'quick' budget).
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as dt
import errno
import io
import json
import math
import os
import re
from pathlib import Path

import pytest
import sinter
from rich.console import Console
from typer.testing import CliRunner

from planner.cli import app
from planner.config import EXAMPLE_TOML, parse_target
from planner.errors import InputError
from planner.fits import Interval
from planner.planning import answer_all
from planner.planning.calculator import CalculatorAnswer
from planner.planning.roadmap import build_roadmap, years_to_date
from planner.planning.verify import compare, operating_points, verify_distances
from planner.reports import files, html, plots, tables, text
from tests.helpers.sampled import SampleOnce, copy_out
from tests.helpers.synthetic import shot_rate, synthetic_stats

W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
ROADMAP = """
[roadmap]
start = 2027-01-01
horizon_years = 6
step = "quarter"
[roadmap.rates]
gate_2q = { per_year = 0.2, spread = 0.05 }
readout = { halving_years = 3.0 }
"""
TOML = EXAMPLE_TOML.replace(
    "joint_scales = [0.5, 1.0]",
    'joint_scales = [0.5, 1.0]\ncomponent_scales = [0.5]\ncomponents = ["gate_2q", "readout", "idle", "gate_1q"]'
) + ROADMAP

runner = CliRunner()


def synthetic_answers(target, *, seed: int = 0, replicas: int = 20):
    sw = target.sweep
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=sw.distances, joint_scales=sw.joint_scales,
                            component_scales=sw.component_scales, components=sw.components,
                            shots=200_000, seed=seed)
    return answer_all(target, stats, replicas=replicas, seed=seed)


@pytest.fixture(scope="module")
def target():
    return parse_target(TOML)


@pytest.fixture(scope="module")
def answers(target):
    return synthetic_answers(target)


def verify_stats(answers, points, distances, *, shots: int = 400_000) -> list[sinter.TaskStats]:
    """Counts at the operating points drawn from the model's own prediction (so it holds)."""
    import numpy as np

    rng = np.random.default_rng(1)
    out = []
    for p in points:
        for d in distances:
            eps = answers.model.logical_error_per_cycle(p.scales, d)
            meta = {"code": "surface", "d": d, "basis": "z", "rounds": d, "axis": p.label,
                    "factor": p.factor, "scales": p.scales}
            out.append(sinter.TaskStats(strong_id=f"{p.label}-{d}", decoder="pymatching", json_metadata=meta,
                                        shots=shots, errors=int(rng.binomial(shots, shot_rate(eps, d)))))
    return out


@pytest.fixture(scope="module")
def verification(answers):
    points = operating_points(answers)
    distances = verify_distances(answers.fits.sampled_distances)
    assert points, "the synthetic device must have an operating point to verify"
    return compare(answers, points, distances, verify_stats(answers, points, distances))


@pytest.fixture
def no_plots(monkeypatch):
    """Report writes without rendering the figures (the plot tests render them)."""
    monkeypatch.setattr(plots, "render_all", lambda answers, *, target: {})


# ---------------------------------------------------------------------------------------------
# verify results are written like every other answer


def test_verify_files_written_and_read_back(tmp_path, verification):
    written = files.write_verification(verification, tmp_path)
    assert sorted(p.name for p in written) == ["verify.csv", "verify.json", "verify.md"]
    md = (tmp_path / "verify.md").read_text()
    assert "predicted" in md and "sampled" in md and "verify-joint" in md
    rows = list(csv.DictReader(io.StringIO((tmp_path / "verify.csv").read_text())))
    assert [r["point"] for r in rows] == [r.label for r in verification.rows]
    eps_rows = [r for r in rows if r["quantity"] == "logical_error_per_cycle"]
    assert eps_rows and all(r["distance"].isdigit() for r in eps_rows)  # '5', not '5.0'
    assert all(r["holds"] in ("true", "false", "") for r in rows)
    doc = json.loads((tmp_path / "verify.json").read_text())
    assert doc["rows"] == verification.to_json()["rows"] and doc["confidence"] == 0.95
    back = files.read_verification(tmp_path)
    assert back.to_json() == verification.to_json()


def test_report_html_has_the_verification_section(tmp_path, no_plots, target, answers, verification):
    written = {p.name for p in files.write_all(answers, out_dir=tmp_path, target=target,
                                               verification=verification)}
    assert {"verify.md", "verify.csv", "verify.json", "report.html"} <= written
    page = (tmp_path / "report.html").read_text()
    assert "Verification on the simulator" in page and "verify-joint" in page
    # the next write without a fresh result takes it from verify.json (same answers: current)
    (tmp_path / "report.html").unlink()
    files.write_all(answers, out_dir=tmp_path, target=target)
    page = (tmp_path / "report.html").read_text()
    assert "verify-joint" in page and text.VERIFY_STALE not in page


def test_report_html_says_when_verify_json_is_out_of_date(tmp_path, no_plots, target, answers, verification):
    files.write_verification(verification, tmp_path)
    later = synthetic_answers(target, seed=7)  # other samples: another fit, other predictions
    assert not verification.is_current(later)
    files.write_all(later, out_dir=tmp_path, target=target)
    page = (tmp_path / "report.html").read_text()
    assert "Verification on the simulator" in page and html.esc(text.VERIFY_STALE) in page
    assert "verify-joint" not in page  # no stale numbers shown as if they were current


def test_broken_verify_json_is_named_not_a_traceback(tmp_path, no_plots, target, answers):
    (tmp_path / "verify.json").write_text('{"rows": [1, 2')
    with pytest.raises(InputError, match="verify.json"):
        files.read_verification(tmp_path)
    files.write_all(answers, out_dir=tmp_path, target=target)  # the rest of the report is still written
    assert "verify.json" in (tmp_path / "report.html").read_text()


# ---------------------------------------------------------------------------------------------
# overflow and underflow: never inf, nan, -0 or a zero interval


FORBIDDEN = re.compile(r"\b(inf|nan|NaN|Infinity)\b|(?<![\w.\d-])-0(?![\d.])|(?<![\d.])0 \[0, 0\]")
ZERO = Interval(low=0.0, best=0.0, high=0.0)
NEG_ZERO = Interval(low=-0.0, best=-0.0, high=-0.0)


@pytest.mark.parametrize("x", [math.inf, math.nan, -math.inf, -0.0, -1e-30])
def test_number_formatters_never_print_inf_nan_or_minus_zero(x):
    for cell in (text.num(x), text.span(x, x, x), text.rate(x, Interval(low=x, best=x, high=x)), text.estimate(x, None),
                 tables.g(x), tables.g(x, 0), tables.iv(Interval(low=x, best=x, high=x)), tables.num_or_iv(x, None)):
        assert not FORBIDDEN.search(cell), cell
    assert str(files._cell(x)) not in ("inf", "-inf", "nan", "-0.0", "-0")


def test_zero_interval_reads_as_one_cell():
    assert text.span(0.0, 0.0, 0.0) == "0" and tables.iv(ZERO) == "0"
    # a model rate of zero is an underflow, not a measured zero
    assert text.rate(0.0, ZERO) == text.UNDERFLOW == tables.iv(ZERO, is_rate=True)
    assert text.span(math.inf, 2.0, math.inf) == f"{text.BEYOND} [2, {text.BEYOND}]"


def broken(answers):
    """The answers with the values an overflow or underflow produces: an infinite required Lambda,
    rates of exactly 0, -0.0 months, a perfect component's infinite Lambda."""
    req = answers.requirements
    today = dataclasses.replace(req.today, logical_error_per_cycle=0.0, logical_error_per_cycle_interval=ZERO,
                                suppression_model_interval=Interval(low=3.0, best=math.inf, high=math.inf))
    mix = dataclasses.replace(req.mix, logical_error_per_cycle=0.0)
    req = dataclasses.replace(req, required_suppression=math.inf,
                              required_suppression_interval=Interval(low=40.0, best=math.inf, high=math.inf),
                              today=today, mix=mix)
    steps = tuple(dataclasses.replace(s, suppression=math.inf, suppression_interval=Interval(low=9.0, best=math.inf, high=math.inf),
                                      eps={d: 0.0 for d in s.eps}, eps_intervals={d: ZERO for d in s.eps})
                  for s in answers.roadmap.steps)
    rm = dataclasses.replace(answers.roadmap, steps=steps)
    rows = tuple(dataclasses.replace(r, months_earlier=-0.0, suppression_perfect=math.inf,
                                     intervals={**r.intervals, "months_earlier": NEG_ZERO,
                                                "suppression_perfect": Interval(low=math.inf, best=math.inf, high=math.inf)})
                 for r in answers.sensitivity.rows)
    sens = dataclasses.replace(answers.sensitivity, rows=rows)
    return dataclasses.replace(answers, requirements=req, roadmap=rm, sensitivity=sens)


def _strip_images(page: str) -> str:
    return re.sub(r"data:image/png;base64,[A-Za-z0-9+/=]+", "", page)


def _strict_json(raw: str) -> object:
    def refuse(name: str) -> None:
        raise AssertionError(f"JSON holds {name}")
    return json.loads(raw, parse_constant=refuse)


def test_report_files_never_show_inf_nan_minus_zero_or_zero_intervals(tmp_path, no_plots, target, answers,
                                                                        verification):
    bad = broken(answers)
    v = dataclasses.replace(verification, rows=tuple(dataclasses.replace(r, predicted=ZERO)
                                                     for r in verification.rows))
    files.write_all(bad, out_dir=tmp_path, target=target, verification=v)
    seen = 0
    for path in sorted(tmp_path.iterdir()):
        if path.is_dir():
            continue
        body = path.read_text()
        seen += 1
        if path.suffix == ".json":
            _strict_json(body)
            continue
        if path.suffix == ".csv":
            for row in csv.reader(io.StringIO(body)):
                assert not {"inf", "-inf", "nan", "-0", "-0.0", "Infinity"} & set(row), (path.name, row)
            continue
        body = _strip_images(body) if path.suffix == ".html" else body
        hit = FORBIDDEN.search(body)
        assert hit is None, (path.name, body[max(hit.start() - 80, 0):hit.end() + 40])
    assert seen >= 10
    md = (tmp_path / "requirements.md").read_text()
    assert text.BEYOND in md and text.OVERFLOW_NOTES[text.BEYOND] in md  # said, and explained
    assert text.UNDERFLOW in (tmp_path / "roadmap.md").read_text()
    req_csv = list(csv.DictReader(io.StringIO((tmp_path / "requirements.csv").read_text())))
    need = next(r for r in req_csv if r["quantity"] == "required_suppression_factor")
    assert need["best"] == "" and text.BEYOND in need["note"]  # empty cell, and the note says why


def test_terminal_tables_never_show_inf_nan_minus_zero_or_zero_intervals(answers, verification):
    bad = broken(answers)
    con = Console(record=True, width=200)
    tables.render_requirements(bad.requirements, con)
    tables.render_roadmap(bad.roadmap, con)
    tables.render_sensitivity(bad.sensitivity, con)
    tables.render_verify(dataclasses.replace(verification, rows=tuple(
        dataclasses.replace(r, predicted=ZERO) for r in verification.rows)), con)
    tables.render_calculator(CalculatorAnswer(suppression=1.0001, eps_measured=1e-3, measured_distance=5,
                                              eps_target=1e-12, reachable=False, distance=None,
                                              physical_qubits=None, logical_error_per_cycle=0.0,
                                              required_suppression=math.inf, prefactor=1e-3), con)
    out = con.export_text()
    hit = FORBIDDEN.search(out)
    assert hit is None, out[max(hit.start() - 100, 0):hit.end() + 40]
    assert text.BEYOND in out and text.OVERFLOW_NOTES[text.BEYOND].split(":")[0] in out


def test_fits_json_is_strict_json_with_non_finite_numbers(tmp_path, target, answers):
    files.write_fits(broken(answers), tmp_path, target=target)
    doc = _strict_json((tmp_path / "fits.json").read_text())
    assert doc["requirements"]["required_suppression_factor"] is None  # inf -> null
    assert doc["roadmap"]["steps"][0]["suppression_factor"] is None


# ---------------------------------------------------------------------------------------------
# cosmetics


@pytest.mark.parametrize(("step", "start", "months"), [("quarter", dt.date(2027, 1, 1), 3),
                                                        ("year", dt.date(2027, 1, 1), 12),
                                                        ("quarter", dt.date(2026, 10, 1), 3)])
def test_roadmap_steps_on_calendar_quarters_and_years(step, start, months, target, answers):
    toml = TOML.replace('step = "quarter"', f'step = "{step}"').replace("start = 2027-01-01",
                                                                          f"start = {start.isoformat()}")
    # a goal out of reach keeps every step of the 6-year horizon in the table
    assert "logical_error_per_cycle = 1e-6" in toml
    t = parse_target(toml.replace("logical_error_per_cycle = 1e-6", "logical_error_per_cycle = 1e-15"))
    rm = build_roadmap(t, answers.model)
    dates = [s.date for s in rm.steps]
    assert len(dates) > 4
    for i, d in enumerate(dates):
        y, m = divmod(start.month - 1 + i * months, 12)
        assert d == dt.date(start.year + y, m + 1, 1), (i, d)


def test_years_to_date_is_monotone_and_clamps_month_ends():
    start = dt.date(2027, 1, 31)
    assert years_to_date(start, 1 / 12) == dt.date(2027, 2, 28)
    days = [years_to_date(start, k / 97) for k in range(400)]
    assert days == sorted(days)


def test_csv_writes_distances_and_qubits_as_integers(tmp_path, answers):
    assert answers.requirements.today.distance_interval is not None  # the float-valued case
    files.write_requirements(answers.requirements, tmp_path, uncertainty=answers.uncertainty)
    files.write_roadmap(answers.roadmap, tmp_path)
    rows = list(csv.DictReader(io.StringIO((tmp_path / "requirements.csv").read_text())))
    for r in rows:
        if r["quantity"] in ("distance", "today_distance", "physical_qubits", "today_physical_qubits"):
            for k in ("best", "low", "high"):
                assert r[k] == "" or re.fullmatch(r"\d+", r[k]), (r["quantity"], k, r[k])
    steps = list(csv.DictReader(io.StringIO((tmp_path / "roadmap.csv").read_text())))
    assert any(s["distance"] for s in steps)
    assert all(s["distance"] == "" or re.fullmatch(r"\d+", s["distance"]) for s in steps)
    assert all(s["physical_qubits"] == "" or re.fullmatch(r"\d+", s["physical_qubits"]) for s in steps)


def test_no_negative_zero_in_csv_and_json():
    assert files.csv_text(("a", "note"), [(-0.0, "")]) == "a,note\n0.0,\n"
    assert json.dumps(text.json_safe({"x": -0.0})) == '{"x": 0.0}'


def _texts(fig):
    """Titles, the suptitle, axis labels, legend entries and free text (tick labels are laid out
    by matplotlib; those outside the view are never drawn)."""
    out = [fig._suptitle] if fig._suptitle is not None else []
    for ax in fig.axes:
        out += [ax.title, ax.xaxis.label, ax.yaxis.label, *ax.texts]
        if ax.get_legend() is not None:
            out += ax.get_legend().get_texts()
    return [t for t in out if t.get_visible() and t.get_text().strip()]


def test_every_plot_text_lies_inside_its_figure(answers, target):
    # a long Lambda interval in the budget title, as with few samples
    sens = dataclasses.replace(answers.sensitivity, suppression_today=2.111111,
                               suppression_today_interval=Interval(low=1.234567, best=2.111111, high=3.456789))
    figs = plots.figures(dataclasses.replace(answers, sensitivity=sens), target=target)
    assert set(figs) == set(html.PLOT_SECTIONS)
    for name, fig in figs.items():
        png = plots.png_bytes(fig)
        assert png.startswith(b"\x89PNG")
        renderer = fig.canvas.get_renderer()
        box = fig.bbox
        for t in _texts(fig):
            bb = t.get_window_extent(renderer)
            assert bb.x0 >= box.x0 - 1 and bb.x1 <= box.x1 + 1 and bb.y0 >= box.y0 - 1 and bb.y1 <= box.y1 + 1, \
                (name, t.get_text())


def test_task_labels_are_readable():
    from planner.jobs.status import status_label as _label
    from planner.sweep import task_label

    meta = {"code": "surface", "d": 5, "basis": "z", "axis": "gate_1q", "factor": 0.3}
    assert task_label(meta) == "gate_1q ×0.3 d=5 z"
    assert _label(meta) == "surface gate_1q ×0.3 d=5 z"
    assert _label({**meta, "factor": "0.3 (edited)"}) == "surface gate_1q ×0.3 (edited) d=5 z"


# ---------------------------------------------------------------------------------------------
# disk full while writing a report file


@pytest.mark.parametrize("where", ["write", "fsync", "replace"])
def test_disk_full_is_one_clear_error_and_leaves_no_tmp(tmp_path, monkeypatch, where):
    path = tmp_path / "report.html"
    path.write_text("old page")

    def full(*a, **k):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(files.os, where, full)  # os.write: planner.fileio writes through it
    with pytest.raises(InputError) as err:
        files.write_atomic(path, "new page " * 1000)
    msg = str(err.value)
    assert "\n" not in msg and str(path) in msg and "No space left on device" in msg and "free" in msg
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.html"]  # no .tmp left behind
    assert path.read_text() == "old page"  # the old file is intact


# ---------------------------------------------------------------------------------------------
# through the CLI, on one tiny real sweep

TINY = """
[device]
name = "tiny report chip"
native_2q = "cz"
[device.errors]
gate_1q = 1e-3
gate_2q = 6e-3
readout = 1e-2
reset = 2e-3
[device.coherence]
t1_us = 60.0
t2_us = 50.0
[device.durations]
gate_1q_ns = 25
gate_2q_ns = 40
measure_ns = 500
reset_ns = 200
[goal]
logical_error_per_cycle = 1e-3
max_qubits = 200
[sweep]
distances = [3, 5]
bases = ["z"]
joint_scales = [0.5, 1.0]
"""


@pytest.fixture(scope="module")
def tiny_out(tmp_path_factory, sample_once: SampleOnce) -> Path:
    root = tmp_path_factory.mktemp("tiny_reports")
    return copy_out(sample_once(TINY, budget="quick", workers=1), root / "out")


@pytest.fixture
def fake_verify(monkeypatch):
    """`planner verify` without sampling: the comparison runs on counts drawn from the model."""
    import planner.jobs.verify as pv

    def run(target, answers, *, out_dir, budget="quick", workers=None, console=None, max_cpu_seconds=None):
        points = pv.operating_points(answers)
        distances = pv.verify_distances(answers.fits.sampled_distances)
        return pv.compare(answers, points, distances, verify_stats(answers, points, distances))

    monkeypatch.setattr(pv, "run_verification", run)


def test_cli_verify_writes_files_and_refreshes_report(tiny_out, fake_verify, monkeypatch):
    for name in ("report.html", "verify.md", "verify.csv", "verify.json"):
        (tiny_out / name).unlink(missing_ok=True)
    res = runner.invoke(app, ["verify", str(tiny_out), "--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.stdout)  # stdout stays one JSON document
    assert all((tiny_out / n).is_file() for n in ("verify.md", "verify.csv", "verify.json"))
    assert json.loads((tiny_out / "verify.json").read_text())["rows"] == doc["rows"]
    assert not (tiny_out / "report.html").exists()
    res = runner.invoke(app, ["verify", str(tiny_out)])
    assert res.exit_code == 0 and "planner run" in res.stderr, res.output  # says where the result goes
    # with a report.html in place, verify rewrites it with the verification section
    from planner.jobs.review import load_out_dir

    monkeypatch.setattr(plots, "render_all", lambda answers, *, target: {})
    spec, stats = load_out_dir(tiny_out)
    files.write_all(answer_all(spec, stats), out_dir=tiny_out, target=spec)
    page = (tiny_out / "report.html").read_text()
    assert "verify-joint" in page  # the verify.json of the same answers is taken in
    (tiny_out / "verify.json").unlink()
    files.write_all(answer_all(spec, stats), out_dir=tiny_out, target=spec)
    assert "Verification on the simulator" not in (tiny_out / "report.html").read_text()
    res = runner.invoke(app, ["verify", str(tiny_out)])
    assert res.exit_code == 0, res.output
    assert "Verification on the simulator" in (tiny_out / "report.html").read_text()
    assert "report.html" in res.stderr


def test_cli_status_labels(tiny_out):
    res = runner.invoke(app, ["status", str(tiny_out)], env={"COLUMNS": "160"})
    assert res.exit_code == 0, res.output
    assert "joint ×0.5 d=3 z" in res.stdout and "jointx" not in res.stdout
    doc = _strict_json(runner.invoke(app, ["status", str(tiny_out), "--json"]).stdout)
    assert doc["tasks"]


def test_cli_disk_full_while_writing_reports(tiny_out, monkeypatch):
    def full(*a, **k):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(files.os, "fsync", full)
    res = runner.invoke(app, ["sensitivity", str(tiny_out)])
    assert res.exit_code == 2, res.output
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("planner: error: ") and "No space left" in lines[0]
    assert "Traceback" not in res.output
    assert not [p for p in tiny_out.iterdir() if p.name.endswith(".tmp")]
