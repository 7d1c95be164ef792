"""Report files from one small real sweep: every file is produced and parses, the numbers agree
across Markdown, CSV, JSON and HTML, writes are atomic, and an unwritable out dir is one clear
error."""

from __future__ import annotations

import base64
import csv
import dataclasses
import json
import math
import os
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from planner.config import COMPONENTS, EXAMPLE_TOML, load_target, parse_target
from planner.errors import InputError
from planner.planning import answer_all
from planner.reports import files, html, plots, text
from planner.store import SampleStore
from planner.sweep import StoppingRule
from tests.helpers.sampled import SampleOnce, copy_out
from tests.helpers.synthetic import PAULI_COMPONENTS

#: small but real: 4 scale points x d = 3, 5 x two bases, 200 errors or 50k shots per task
RULE = StoppingRule(max_errors=200, max_shots=50_000)
ROADMAP = """
[roadmap]
start = 2030-01-01
horizon_years = 10
step = "year"
[roadmap.rates]
gate_2q = { per_year = 0.2, spread = 0.05 }
readout = { halving_years = 3.0 }
"""
# one round count (r = d): these tests check the files' agreement at a small budget (200 errors per
# task); the decay fit over r = d, 3d widens the sensitivity intervals there until some reach an
# infinite end (a JSON null), which the agreement checks below do not expect
TARGET_TOML = EXAMPLE_TOML.replace(
    "joint_scales = [0.5, 1.0]",
    'joint_scales = [0.5, 1.0]\ncomponent_scales = [0.5]\ncomponents = ["gate_2q", "readout"]'
    '\nround_multiples = [1]') + ROADMAP
NO_ROADMAP_TOML = TARGET_TOML.replace(ROADMAP, "")

EXPECTED = {"requirements.md", "requirements.csv", "roadmap.md", "roadmap.csv", "roadmap_dates.csv",
            "sensitivity.md", "sensitivity.csv", "fits.json", "report.html",
            *(f"plots/{n}.png" for n in ("logical_error_vs_distance", "lambda_vs_joint_scale",
                                         "lambda_vs_component_scale", "inverse_lambda_budget", "roadmap"))}


@dataclasses.dataclass(frozen=True)
class Built:
    out: Path
    target: Any
    stats: list
    answers: Any
    written: list[Path]


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory, sample_once: SampleOnce) -> Built:
    root = tmp_path_factory.mktemp("reports")
    path = root / "small.toml"
    path.write_text(TARGET_TOML)
    target = load_target(path)
    out = copy_out(sample_once(TARGET_TOML, rule=RULE, workers=2), root / "out")
    store = SampleStore(out)
    stats = store.stats()
    answers = answer_all(target, stats, seed=0)
    written = files.write_all(answers, out_dir=out, target=target)
    return Built(out, target, stats, answers, written)


def _read_csv(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as fh:
        return list(csv.DictReader(fh))


def _header(path: Path) -> list[str]:
    with path.open(newline="") as fh:
        return next(csv.reader(fh))


class _Page(HTMLParser):
    """Collects tags, image sources, links and the cell texts of every table row."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.images: list[str] = []
        self.links: list[str] = []
        self.rows: list[list[str]] = []
        self.text: list[str] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src") or "")
        for k in ("href", "src"):
            if k in a and tag != "img":
                self.links.append(a[k] or "")
        if tag == "tr":
            self.rows.append([])
        if tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append("".join(self._cell))
            self._cell = None

    def handle_data(self, data: str) -> None:
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)


def _page(path: Path) -> _Page:
    p = _Page()
    p.feed(path.read_text())
    p.close()
    return p


def _md_rows(path: Path) -> list[list[str]]:
    rows = []
    for line in path.read_text().splitlines():
        if line.startswith("| "):
            rows.append([c.strip().replace("\\|", "|") for c in line.strip()[2:-2].split(" | ")])
    return rows


# ---------------------------------------------------------------------------------------------


def test_every_file_is_written(built: Built) -> None:
    rel = {p.relative_to(built.out).as_posix() for p in built.written}
    assert rel == EXPECTED
    assert all((built.out / r).is_file() and (built.out / r).stat().st_size > 0 for r in rel)
    # ordinary files: readable by others as far as the umask allows (mkstemp alone gives 0600)
    umask = os.umask(0o022)
    os.umask(umask)
    assert all((built.out / r).stat().st_mode & 0o777 == 0o666 & ~umask for r in rel)


def test_csv_files_have_the_expected_columns(built: Built) -> None:
    assert _header(built.out / "requirements.csv") == list(files.REQUIREMENTS_COLUMNS)
    rows = _read_csv(built.out / "requirements.csv")
    levers = [r["lever"] for r in rows if r["quantity"] == "factor_needed"]
    assert levers == ["joint", *PAULI_COMPONENTS]  # no [device.leakage]: leakage is left out
    for r in rows:  # numbers or empty, never a formatted interval
        for k in ("best", "low", "high"):
            assert r[k] == "" or math.isfinite(float(r[k])), r
    assert _header(built.out / "sensitivity.csv") == list(files.SENSITIVITY_COLUMNS)
    sens = _read_csv(built.out / "sensitivity.csv")
    assert sorted(r["component"] for r in sens) == sorted(PAULI_COMPONENTS)
    # components without their own axis (here all but gate_2q and readout) have no share of their
    # own: empty, "sampled" false; the sampled shares and the group's share together make 1
    unsampled = built.answers.sensitivity.unsampled
    assert unsampled and all(r["share_of_inverse_lambda"] == "" and r["sampled"] == "false"
                             for r in sens if r["component"] in unsampled)
    together = built.answers.sensitivity.unsampled_share
    assert math.isclose(sum(float(r["share_of_inverse_lambda"]) for r in sens if r["component"] not in unsampled)
                        + together, 1.0, rel_tol=1e-9)
    rm = built.answers.roadmap
    head = _header(built.out / "roadmap.csv")
    assert head[:2] == ["date", "years"]
    assert [h for h in head if h.startswith("scale_")] == [f"scale_{c}" for c in COMPONENTS]
    assert [h for h in head if h.startswith("eps_d")] == [f"eps_d{d}" for d in rm.candidate_distances]
    steps = _read_csv(built.out / "roadmap.csv")
    assert len(steps) == len(rm.steps) and steps[0]["date"] == "2030-01-01"
    assert _header(built.out / "roadmap_dates.csv") == list(files.DATES_COLUMNS)
    assert [r["event"] for r in _read_csv(built.out / "roadmap_dates.csv")] == ["goal", "Lambda >= 2",
                                                                               "Lambda >= 4"]


def test_fits_json_carries_the_target_and_the_confidence(built: Built) -> None:
    doc = json.loads((built.out / "fits.json").read_text())
    assert doc["confidence"] == 0.95
    assert doc["target"]["sha256"] == built.target.sha256 and doc["target"]["name"] == "small"
    assert {"fits", "model", "requirements", "roadmap", "sensitivity", "uncertainty"} <= doc.keys()
    lam = [x for x in doc["fits"]["lambda"] if x["axis"] == "joint" and x["factor"] == 1.0]
    assert len(lam) == 1 and set(lam[0]["suppression_factor"]) == {"best", "low", "high"}


def test_pngs_decode_and_are_not_blank(built: Built) -> None:
    from matplotlib.image import imread

    for name in (p for p in EXPECTED if p.endswith(".png")):
        img = imread(built.out / name)
        assert img.ndim == 3 and img.shape[0] > 200 and img.shape[1] > 300, name
        assert float(np.var(img[..., :3])) > 0, name


def test_html_is_self_contained_and_embeds_every_plot(built: Built) -> None:
    page = _page(built.out / "report.html")
    assert page.links == []  # no stylesheet, script or image link to anything outside
    assert "script" not in page.tags and "link" not in page.tags
    pngs = sorted((built.out / "plots").glob("*.png"))
    assert len(page.images) == len(pngs) == 5
    embedded = []
    for src in page.images:
        assert src.startswith("data:image/png;base64,")
        embedded.append(base64.b64decode(src.split(",", 1)[1], validate=True))
    assert sorted(embedded) == sorted(p.read_bytes() for p in pngs)
    body = " ".join(page.text)
    assert "check against the device" in body.lower() or "check them against the device" in body.lower()
    assert "No substitute for the team's own validation" in body
    assert built.target.device.name in body and "1e-06" in body


def test_html_escapes_text(built: Built, tmp_path: Path) -> None:
    target = parse_target(TARGET_TOML.replace('name = "example"', 'name = "<b>chip & co</b>"'))
    html_text = (files.write_all(built.answers, out_dir=tmp_path, target=target)[-1]).read_text()
    assert "&lt;b&gt;chip &amp; co&lt;/b&gt;" in html_text and "<b>chip" not in html_text


def test_tables_read_the_same_in_markdown_and_html(built: Built) -> None:
    page_rows = _page(built.out / "report.html").rows
    for md in ("requirements.md", "roadmap.md", "sensitivity.md"):
        rows = _md_rows(built.out / md)
        assert len(rows) > 3
        for r in rows:
            assert r in page_rows, (md, r)


def test_joint_factor_and_lambda_today_agree_everywhere(built: Built) -> None:
    doc = json.loads((built.out / "fits.json").read_text())
    joint = doc["requirements"]["joint"]["factor_interval"]
    today = next(x for x in doc["fits"]["lambda"] if x["axis"] == "joint" and x["factor"] == 1.0)
    today = today["suppression_factor"]
    rows = {(r["quantity"], r["lever"]): r for r in _read_csv(built.out / "requirements.csv")}
    for key, iv in ((("factor_needed", "joint"), joint), (("suppression_factor_today_fitted", "joint"), today)):
        for k in ("best", "low", "high"):
            assert float(rows[key][k]) == iv[k]  # full precision round trip
    md = (built.out / "requirements.md").read_text()
    html_text = " ".join(_page(built.out / "report.html").text)
    for iv in (joint, today):
        shown = text.span(iv["best"], iv["low"], iv["high"])
        assert shown in md and shown in html_text, shown
    assert md.count(text.span(joint["best"], joint["low"], joint["high"])) == 1


def test_markdown_states_the_interval_once_and_a_caveat_under_each_table(built: Built) -> None:
    for name in ("requirements.md", "roadmap.md", "sensitivity.md"):
        md = (built.out / name).read_text()
        assert md.count("95% confidence") == 1, name
        tables = md.count("\n## ")
        assert tables >= 1 and md.count(f"_{text.CAVEAT}_") == tables, name
        assert sum(line.startswith("|---|") for line in md.splitlines()) == tables
    req = (built.out / "requirements.md").read_text()
    assert "(x today's error)" in req and "(ratio)" in req  # units in the headers
    rj = built.answers.requirements.to_json()
    extrapolated = any(c["extrapolation"] for c in (rj["joint"], rj["cheapest_mix"], *rj["components"]))
    cells = [c for row in _md_rows(built.out / "requirements.md") for c in row]
    assert any(text.EXTRAPOLATED in c for c in cells) == extrapolated


def test_rate_plot_draws_the_goal_and_dashes_the_extrapolation(built: Built) -> None:
    goal = built.target.goal.logical_error_per_cycle
    fig = plots.rates_figure(built.answers.fits, goal=goal)
    ax = fig.axes[0]
    assert any(list(line.get_ydata()) == [goal, goal] for line in ax.get_lines())
    # the goal (1e-6) is far below the sampled rates (~1e-2), so every line goes on dashed
    assert sum(line.get_linestyle() == "--" for line in ax.get_lines()) == 2
    assert ax.get_yscale() == "log" and ax.get_xlabel() == "code distance d"
    lam = plots.lambda_joint_figure(built.answers.fits, built.answers.model).axes[0]
    assert any(list(line.get_ydata()) == [1.0, 1.0] for line in lam.get_lines())


def test_no_temporary_files_are_left(built: Built) -> None:
    leftovers = [p for p in built.out.rglob("*") if p.name.endswith(".tmp")]
    assert leftovers == []


def test_a_failed_write_keeps_the_old_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path = files.write_atomic(tmp_path / "a.csv", "old\n")

    def broken(src: str, dst: str) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(files.os, "replace", broken)
    with pytest.raises(InputError, match="a.csv: cannot write: No space left"):
        files.write_atomic(path, "new\n" * 1000)
    assert path.read_text() == "old\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv"]


def test_unwritable_out_dir_is_an_input_error(built: Built, tmp_path: Path) -> None:
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    with pytest.raises(InputError, match="a-file: cannot write reports"):
        files.write_all(built.answers, out_dir=blocker, target=built.target)
    with pytest.raises(InputError, match="a-file/sub: cannot write reports"):
        files.write_requirements(built.answers.requirements, blocker / "sub")
    assert blocker.read_text() == "x"


def test_no_roadmap_section_writes_no_roadmap_files(built: Built, tmp_path: Path) -> None:
    target = parse_target(NO_ROADMAP_TOML, source="noroad.toml")
    answers = answer_all(target, built.stats, seed=0, replicas=20)
    rel = {p.relative_to(tmp_path).as_posix() for p in files.write_all(answers, out_dir=tmp_path, target=target)}
    assert rel == {r for r in EXPECTED if "roadmap" not in r}
    assert "Roadmap" not in (tmp_path / "report.html").read_text()


def test_single_distance_writes_what_it_can(built: Built, tmp_path: Path) -> None:
    stats = [s for s in built.stats if s.json_metadata["d"] == 3]
    answers = answer_all(built.target, stats, seed=0)
    assert answers.model is None
    rel = {p.relative_to(tmp_path).as_posix() for p in files.write_all(answers, out_dir=tmp_path, target=built.target)}
    assert rel == {"fits.json", "report.html", "plots/logical_error_vs_distance.png"}
    assert "only distance 3 sampled" in (tmp_path / "report.html").read_text()
    assert json.loads((tmp_path / "fits.json").read_text())["requirements"] is None


def test_samples_still_read_after_reports_are_written(built: Built) -> None:
    # the out dir now holds report CSVs beside samples/: they must never be read as shards
    again = SampleStore(built.out).stats()
    assert sum(s.shots for s in again) == sum(s.shots for s in built.stats)
    assert (built.out / "requirements.csv").is_file()


# ---------------------------------------------------------------------------------------------
# the bootstrap intervals in every file (consistency with fits.json, the one machine record)


def _csv_iv(row: dict[str, str], prefix: str = "") -> tuple[float, float, float]:
    keys = ("best", "low", "high") if not prefix else (prefix, f"{prefix}_low", f"{prefix}_high")
    return tuple(float(row[k]) for k in keys)  # type: ignore[return-value]


def _json_iv(iv: dict[str, float]) -> tuple[float, float, float]:
    return iv["best"], iv["low"], iv["high"]


def _shown(iv: dict[str, float], scale: float = 1.0) -> str:
    return text.span(iv["best"] * scale, iv["low"] * scale, iv["high"] * scale)


def test_outdated_point_value_wording_is_gone(built: Built) -> None:
    for name in ("requirements.md", "roadmap.md", "sensitivity.md", "report.html"):
        body = (built.out / name).read_text()
        assert "Point values of the model" not in body and "(no interval)" not in body, name
        # the one allowed wording for a model figure without interval appears only without replicas
        assert text.POINT_VALUE not in body, name
    title = plots.budget_figure(built.answers.sensitivity).axes[0].get_title()
    assert "point values" not in title and text.interval(built.answers.sensitivity.suppression_today_interval) in title


def test_requirement_intervals_agree_across_json_csv_markdown_html(built: Built) -> None:
    req = json.loads((built.out / "fits.json").read_text())["requirements"]
    csv_rows = {(r["quantity"], r["lever"]): r for r in _read_csv(built.out / "requirements.csv")}
    md = (built.out / "requirements.md").read_text()
    md_rows = {r[0]: r for r in _md_rows(built.out / "requirements.md")}
    page = _page(built.out / "report.html")
    html_text = " ".join(page.text)
    checked = 0
    singles = [(("required_suppression_factor", ""), req["required_suppression_factor_interval"]),
               (("suppression_factor_today_model", ""), req["today"]["suppression_factor_model_interval"]),
               (("today_logical_error_per_cycle", ""),
                req["today"]["logical_error_per_cycle_at_distance_interval"]),
               (("cheapest_mix_cost", ""), req["cheapest_mix"]["cost_halvings_interval"]),
               (("cheapest_mix_suppression_factor", ""), req["cheapest_mix"]["suppression_factor_interval"])]
    for key, iv in singles:
        assert iv is not None, key  # 200 replicas: every one of these has an interval
        assert _csv_iv(csv_rows[key]) == _json_iv(iv), key  # full precision round trip
        assert _shown(iv) in md and _shown(iv) in html_text, key
        checked += 1
    mix = req["cheapest_mix"]
    assert mix["reachable"]
    for lever in (req["joint"], *req["components"]):
        name, iv = lever["lever"], lever["suppression_factor_interval"]
        if not lever["sampled"]:  # no own sweep axis: no factor, no Lambda, no verdict, no mix factor
            assert lever["reachable"] is None and lever["factor"] is None and iv is None, name
            row = csv_rows[("suppression_factor_reached", name)]
            assert (row["best"], row["low"], row["high"], row["reachable"]) == ("", "", "", ""), name
            assert md_rows[name][1:6] == ["not sampled", "—", "not sampled", "—", "—"], name
            assert mix["scales"][name] == 1.0 and name in mix["not_sampled"] and name not in mix["scale_intervals"]
            checked += 2
            continue
        assert _csv_iv(csv_rows[("suppression_factor_reached", name)]) == _json_iv(iv)
        assert md_rows[name][2] == ("" if lever["reachable"] else "max ") + _shown(iv)
        checked += 1
        if name == "joint":
            continue
        f_iv, s_iv = mix["scale_intervals"][name], mix["cost_share_intervals"][name]
        assert _csv_iv(csv_rows[("cheapest_mix_factor", name)]) == _json_iv(f_iv)
        assert _csv_iv(csv_rows[("cheapest_mix_cost_share", name)]) == _json_iv(s_iv)
        assert md_rows[name][3].removesuffix(f" {text.EXTRAPOLATED}") == _shown(f_iv)
        assert md_rows[name][5] == _shown(s_iv, 100)  # percent in the tables, fraction in the CSV
        # halvings = log2(1/factor): the factor's high end is the halvings' low end
        h = _csv_iv(csv_rows[("cheapest_mix_halvings", name)])
        assert h == pytest.approx((-math.log2(f_iv["best"]), -math.log2(f_iv["high"]), -math.log2(f_iv["low"])),
                                  abs=1e-12)
        assert h[1] <= h[0] <= h[2]
        checked += 1
    assert checked == len(singles) + 1 + 2 * len(PAULI_COMPONENTS)
    assert all(r in page.rows for r in md_rows.values())


def test_sensitivity_intervals_agree_across_json_csv_markdown(built: Built) -> None:
    sens = json.loads((built.out / "fits.json").read_text())["sensitivity"]
    assert sens["num_replicas"] == 200
    csv_rows = {r["component"]: r for r in _read_csv(built.out / "sensitivity.csv")}
    md_rows = {r[0].removesuffix(" (lumped)"): r for r in _md_rows(built.out / "sensitivity.md")}
    pairs = (("share_of_inverse_lambda", "share_interval", 1, 100), ("elasticity", "elasticity_interval", 2, 1),
             ("suppression_factor_halved", "suppression_factor_halved_interval", 3, 1),
             ("suppression_factor_perfect", "suppression_factor_perfect_interval", 4, 1),
             ("months_earlier", "months_earlier_interval", 5, 1))
    for comp in sens["components"]:
        for col, key, cell, scale in pairs:
            iv = comp[key]
            if iv is None:  # the figure itself does not exist (e.g. the goal is not met in the horizon)
                assert comp.get(key.removesuffix("_interval")) is None, (comp["component"], key)
                continue
            assert iv["low"] <= iv["best"] <= iv["high"], (comp["component"], key)
            assert _csv_iv(csv_rows[comp["component"]], col) == _json_iv(iv), (comp["component"], col)
            assert md_rows[comp["component"]][cell] == _shown(iv, scale), (comp["component"], col)
    for comp in sens["components"]:  # eps at the goal distance, halved or perfect: JSON and CSV agree
        for col in ("logical_error_per_cycle_halved", "logical_error_per_cycle_perfect"):
            iv = comp[f"{col}_interval"]
            if iv is not None:
                assert iv["low"] <= iv["best"] <= iv["high"]
                assert _csv_iv(csv_rows[comp["component"]], col) == _json_iv(iv), (comp["component"], col)
    lead = _shown(sens["suppression_factor_today_interval"])
    assert lead in (built.out / "sensitivity.md").read_text()
    assert lead in " ".join(_page(built.out / "report.html").text)


def test_roadmap_intervals_agree_across_json_csv_markdown(built: Built) -> None:
    rm = json.loads((built.out / "fits.json").read_text())["roadmap"]
    dg = rm["goal_distance"]
    assert rm["num_replicas"] == 200 and dg in rm["candidate_distances"]
    csv_steps = _read_csv(built.out / "roadmap.csv")
    tables: list[list[list[str]]] = []  # each Markdown table: header row first
    for r in _md_rows(built.out / "roadmap.md"):
        if r[0] in ("date", "event"):
            tables.append([])
        tables[-1].append(r)
    (head, *steps), (eps_head, *eps_rows), dates = tables
    assert "Lambda (ratio)" in head and f"eps d={dg} (per cycle)" in head and dates[0][0] == "event"
    assert eps_head == ["date", *(f"eps d={d} (per cycle)" for d in rm["candidate_distances"])]
    md_steps, md_eps = {r[0]: r for r in steps}, {r[0]: r for r in eps_rows}
    assert len(csv_steps) == len(rm["steps"]) == len(md_steps) == len(md_eps)
    for step, row in zip(rm["steps"], csv_steps):
        lam = step["suppression_factor_interval"]
        assert _csv_iv(row, "suppression_factor") == _json_iv(lam)
        cells = dict(zip(head, md_steps[step["date"]]))
        assert cells["Lambda (ratio)"].removesuffix(f" {text.EXTRAPOLATED}") == _shown(lam)
        assert (text.EXTRAPOLATED in cells["Lambda (ratio)"]) == bool(step["extrapolation"])
        assert cells[f"eps d={dg} (per cycle)"] == _shown(step["logical_error_per_cycle_intervals"][str(dg)])
        eps_cells = dict(zip(eps_head, md_eps[step["date"]]))
        for d in rm["candidate_distances"]:
            iv = step["logical_error_per_cycle_intervals"][str(d)]
            assert (float(row[f"eps_d{d}"]), float(row[f"eps_low_d{d}"]), float(row[f"eps_high_d{d}"])) == _json_iv(iv)
            assert eps_cells[f"eps d={d} (per cycle)"] == _shown(iv)


def test_html_puts_each_plot_under_its_tables_and_the_caveats_first(built: Built) -> None:
    page = (built.out / "report.html").read_text()
    at = lambda s: page.index(s)  # noqa: E731
    assert at('class="caveats"') < at("<h2>Device and goal</h2>")
    sections = ["<h2>Fits and model</h2>", "<h2>Requirements</h2>", "<h2>Roadmap</h2>", "<h2>Sensitivity</h2>"]
    assert [at(s) for s in sections] == sorted(at(s) for s in sections)
    img = {name: at(f'<img alt="{html.esc(caption)}"') for name, caption in html.PLOT_CAPTIONS.items()}
    for name in ("logical_error_vs_distance", "lambda_vs_joint_scale", "lambda_vs_component_scale"):
        assert at("Suppression factor Lambda per scale point") < img[name] < at(sections[1]), name
    assert at("When the goal and the Lambda milestones are met") < img["roadmap"] < at(sections[3])
    assert at("Which component holds Lambda back") < img["inverse_lambda_budget"]


def test_budget_plot_error_bars_are_the_share_intervals(built: Built) -> None:
    sens = built.answers.sensitivity
    ax = plots.budget_figure(sens).axes[0]
    bars = [c for c in ax.containers if hasattr(c, "has_xerr") and c.has_xerr]
    assert len(bars) == 1
    segs = bars[0].lines[2][0].get_segments()  # one horizontal segment per bar, bottom bar first
    # components without their own axis have no bar: one bar gives their share together (on top)
    want = [(100 * r.intervals["share"].low, 100 * r.intervals["share"].high) for r in reversed(sens.rows)
            if r.sampled]
    iv = sens.unsampled_share_interval
    want.insert(0, (100 * iv.low, 100 * iv.high))
    got = [(float(s[:, 0].min()), float(s[:, 0].max())) for s in segs]
    assert np.allclose(got, want, rtol=0, atol=1e-9), (got, want)


def test_component_plot_labels_the_sampled_factors(built: Built) -> None:
    ax = plots.lambda_components_figure(built.answers.fits).axes[0]
    ticks = list(ax.get_xticks())
    assert ticks == [0.5, 1.0]  # component_scales = [0.5] in TARGET_TOML, plus today's point
    assert ax.xaxis.get_major_formatter().format_ticks(ticks) == ["0.5", "1"]
    assert list(ax.xaxis.get_minor_locator()()) == []  # no unlabelled minor ticks between them
    lam = plots.lambda_joint_figure(built.answers.fits, built.answers.model).axes[0]
    labels = lam.yaxis.get_major_formatter().format_ticks(lam.get_yticks())
    assert len(labels) >= 3 and "1" in labels  # a log axis of less than a decade still reads


def test_roadmap_band_is_the_rows_interval_at_the_goal_distance(built: Built) -> None:
    rm, models = built.answers.roadmap, built.answers.uncertainty.models
    dg = rm.goal_distance
    scales = np.array([[s.scales[c] for c in COMPONENTS] for s in rm.steps])
    lo, hi = plots.eps_band(models, scales, dg, np.array([s.eps[dg] for s in rm.steps]))
    for s, a, b in zip(rm.steps, lo, hi):
        assert (a, b) == pytest.approx((s.eps_intervals[dg].low, s.eps_intervals[dg].high), rel=1e-9)
    fig = plots.roadmap_figure(rm, built.answers.model, built.target, models=models)
    labels = [c.get_label() for c in fig.axes[0].collections]
    assert any(f"d = {dg}: 95% interval" in x for x in labels)
    bare = plots.roadmap_figure(rm, built.answers.model, built.target)
    assert not any("interval" in c.get_label() for c in bare.axes[0].collections)


def test_without_bootstrap_model_figures_say_they_are_best_values(built: Built) -> None:
    answers = answer_all(built.target, built.stats, seed=0, replicas=0)
    req = text.requirements_tables(answers.requirements)[0]
    assert f"{text.num(answers.requirements.required_suppression)} ({text.POINT_VALUE})" in " ".join(req.lead)
    assert "fitted at joint factor 1" in " ".join(req.lead)  # the fitted Lambda keeps its LR interval
    sens = text.sensitivity_tables(answers.sensitivity)[0]
    assert text.POINT_VALUE in sens.lead[0] and not any("[" in c for r in sens.rows for c in r[1:6])
    steps, eps, _ = text.roadmap_tables(answers.roadmap)
    assert text.POINT_VALUE in " ".join(steps.lead) and text.POINT_VALUE in eps.lead[0]
    assert not any("[" in c for r in (*steps.rows, *eps.rows) for c in r)
    assert "no bootstrap" in plots.budget_figure(answers.sensitivity).axes[0].get_title()
