"""Issue 11, item 5: components without their own sweep axis read "not sampled" everywhere.

Their weight is known only together (they move only with the joint factor), so no answer about one
of them alone exists: no share, no lever factor, no verdict, no change in the cheapest mix; the
group's share together is shown as one row. Synthetic counts (tests/helpers/synthetic.py): nothing
samples; the true weights are the invented ones below.
"""

from __future__ import annotations

import csv
import json
import re
from pathlib import Path

import pytest
from rich.console import Console

from planner.config import COMPONENTS, EXAMPLE_TOML, parse_target
from planner.planning import answer_all
from planner.reports import files, tables
from planner.reports.formats import percent
from tests.helpers.synthetic import PAULI_COMPONENTS, synthetic_stats

# invented weights (1/Lambda per unit scale): total 0.47, Lambda today ~2.1
W = {"gate_1q": 0.02, "gate_2q": 0.2, "readout": 0.08, "reset": 0.02, "idle": 0.1, "idle_measure": 0.05}
AXES = ("gate_2q", "readout")
OTHERS = tuple(c for c in PAULI_COMPONENTS if c not in AXES)  # no [device.leakage]: no leakage
# the sampled components made expensive: a mix free to change the others would pick them
COSTS = "\n[costs]\ngate_2q = 50.0\nreadout = 50.0\n"
ROADMAP = "\n[roadmap]\nstart = 2030-01-01\nhorizon_years = 10\n[roadmap.rates]\ngate_2q = {per_year = 0.3}\n"


def _target(components: tuple[str, ...]):
    sweep = f'[sweep]\ncomponent_scales = [0.5]\ncomponents = {json.dumps(list(components))}'
    return parse_target(EXAMPLE_TOML.replace("[sweep]", sweep) + COSTS + ROADMAP)


def _answers(components: tuple[str, ...]):
    stats = synthetic_stats(weights=W, prefactor=0.1, distances=(3, 5, 7), joint_scales=(0.5, 0.7, 1.0),
                            component_scales=(0.5,), components=components, shots=100_000, seed=11)
    return _target(components), answer_all(_target(components), stats, seed=3, replicas=60)


@pytest.fixture(scope="module")
def subset():
    return _answers(AXES)


@pytest.fixture(scope="module")
def every():
    return _answers(PAULI_COMPONENTS)


def _terminal(answers) -> str:
    console = Console(width=200, record=True)
    tables.render_fits(answers.fits, console, answers.model)
    tables.render_requirements(answers.requirements, console)
    tables.render_sensitivity(answers.sensitivity, console)
    return console.export_text()


def _written(answers, target, out: Path) -> dict[str, str]:
    files.write_all(answers, out_dir=out, target=target)
    names = ("requirements.md", "requirements.csv", "sensitivity.md", "sensitivity.csv", "fits.json", "report.html")
    return {n: (out / n).read_text() for n in names}


def _even_split_cells(answers) -> list[str]:
    """The share each unsampled component would get from an even split of its group's share."""
    sens = answers.sensitivity
    return [percent(sens.unsampled_share / len(sens.unsampled))]


def test_the_model_names_the_components_without_an_axis(subset):
    _, answers = subset
    assert set(answers.model.unsampled) == set(OTHERS)
    doc = answers.model.to_json()
    assert all(doc["weights"][c] is None and doc["curvature"][c] is None for c in OTHERS)
    assert all(doc["weights"][c] is not None for c in AXES)
    # the group's weight together is fitted: truth 0.19 (invented above), 60 bootstrap replicas
    assert doc["unsampled_weight_together"] == pytest.approx(sum(W[c] for c in OTHERS), rel=0.15)


def test_sensitivity_rows_say_not_sampled_and_come_last(subset):
    _, answers = subset
    sens = answers.sensitivity
    rows = {r.component: r for r in sens.rows}
    assert [r.component for r in sens.rows][-len(OTHERS):] == sorted(OTHERS, key=COMPONENTS.index)
    for c in OTHERS:
        r = rows[c]
        assert not r.sampled and r.intervals == {}
        assert (r.share, r.elasticity, r.suppression_halved, r.suppression_perfect, r.months_earlier) == (None,) * 5
        assert "not sampled" in r.note and "sweep.components" in r.note and "planner sweep TARGET" in r.note
        js = r.to_json()
        assert js["sampled"] is False and js["share_of_inverse_lambda"] is None and js["share_interval"] is None
    for c in AXES:
        assert rows[c].sampled and rows[c].share is not None and rows[c].to_json()["sampled"] is True
    # the group's share together: truth 0.19 / 0.47 = 0.404 (invented weights), inside its interval
    iv = sens.unsampled_share_interval
    assert iv is not None and iv.low <= sens.unsampled_share <= iv.high
    assert iv.low <= 0.19 / 0.47 <= iv.high
    assert sum(rows[c].share for c in AXES) + sens.unsampled_share == pytest.approx(1.0)
    doc = sens.to_json()["not_sampled"]
    assert set(doc["components"]) == set(OTHERS) and doc["share_of_inverse_lambda"] == sens.unsampled_share


def test_levers_give_no_answer_for_components_without_an_axis(subset):
    _, answers = subset
    req = answers.requirements
    levers = {a.lever: a for a in req.components}
    for c in OTHERS:
        a = levers[c]
        assert not a.sampled and a.reachable is None and a.factor is None
        assert a.factor_interval is None and a.suppression_interval is None
        js = a.to_json()
        assert (js["sampled"], js["reachable"], js["factor"], js["suppression_factor"]) == (False, None, None, None)
        assert "not sampled" in a.note and "planner sweep TARGET" in a.note
    assert all(levers[c].sampled and levers[c].to_json()["sampled"] for c in AXES)
    assert any("not sampled" in n for n in req.notes)


def test_the_mix_never_changes_a_component_without_an_axis(subset):
    _, answers = subset
    mix = answers.requirements.mix
    assert mix.reachable and mix.changed()
    assert set(mix.changed()) <= set(AXES)
    assert all(mix.scales[c] == 1.0 for c in OTHERS)
    assert set(mix.not_sampled) == set(OTHERS) and "not sampled" in mix.note
    assert set(mix.to_json()["not_sampled"]) == set(OTHERS)
    assert not set(mix.scale_intervals) & set(OTHERS)


def test_tables_and_files_say_not_sampled_never_an_even_split(subset, tmp_path):
    target, answers = subset
    out = _written(answers, target, tmp_path)
    term = _terminal(answers)
    for name, body in {**out, "terminal": term}.items():
        assert "(lumped)" not in body and "split evenly" not in body, name
    # Markdown: every unsampled component's row reads "not sampled", and the group gets one row
    for name in ("requirements.md", "sensitivity.md"):
        rows = {r[0]: r for r in _md_rows(out[name])}
        for c in OTHERS:
            assert "not sampled" in rows[c][1], (name, c)
            assert "not reachable" not in " ".join(rows[c]), (name, c)
    sens_md = {r[0]: r for r in _md_rows(out["sensitivity.md"])}
    group = next(k for k in sens_md if k.startswith("not sampled separately"))
    assert all(c in group for c in OTHERS)
    assert sens_md[group][1] == percent(answers.sensitivity.unsampled_share, answers.sensitivity.unsampled_share_interval)
    # no share cell of an unsampled component anywhere: the even split is printed nowhere
    for even in _even_split_cells(answers):
        assert all(even + " [" not in r[1] for r in sens_md.values()), even
    # CSV: empty figures, sampled false, the note says how to sample
    sens_csv = {r["component"]: r for r in csv.DictReader(out["sensitivity.csv"].splitlines())}
    for c in OTHERS:
        r = sens_csv[c]
        assert r["sampled"] == "false" and r["share_of_inverse_lambda"] == "" and r["elasticity"] == ""
        assert "planner sweep TARGET" in r["note"]
    req_csv = [r for r in csv.DictReader(out["requirements.csv"].splitlines()) if r["lever"] in OTHERS]
    for r in req_csv:
        if r["quantity"] in ("factor_needed", "suppression_factor_reached"):
            assert (r["best"], r["reachable"]) == ("", "") and "not sampled" in r["note"], r
        if r["quantity"] == "cheapest_mix_factor":
            assert float(r["best"]) == 1.0 and "not sampled" in r["note"], r
    # JSON (fits.json carries the model, requirements and sensitivity)
    doc = json.loads(out["fits.json"])
    assert {c["component"] for c in doc["sensitivity"]["components"] if c["sampled"] is False} == set(OTHERS)
    # terminal: the lever table and the sensitivity table say "not sampled" for each of them
    for c in OTHERS:
        assert re.search(rf"{c}\s.*not sampled", term), c
    assert "not sampled, together" in term
    # HTML: the model section gives no weight of their own
    assert all(f"weight w_{c} (1/Lambda per unit scale)</th><td>not sampled" in _squash(out["report.html"])
               for c in OTHERS)


def test_budget_plot_has_no_bar_of_their_own(subset):
    from planner.reports import plots

    _, answers = subset
    ax = plots.budget_figure(answers.sensitivity).axes[0]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert not set(labels) & set(OTHERS)
    assert any(t.startswith("not sampled separately") for t in labels) and set(AXES) <= set(labels)
    comp = plots.lambda_components_figure(answers.fits, unsampled=answers.model.unsampled).axes[0]
    assert any("not sampled" in t.get_text() for t in comp.texts)


def test_all_components_on_axes_show_no_not_sampled(every, tmp_path):
    target, answers = every
    assert answers.model.unsampled == ()
    assert all(r.sampled and r.share is not None for r in answers.sensitivity.rows)
    assert all(a.sampled for a in answers.requirements.components) and answers.requirements.mix.not_sampled == ()
    out = _written(answers, target, tmp_path)
    for name, body in {**out, "terminal": _terminal(answers)}.items():
        assert "not sampled" not in body, name
    assert '"sampled": false' not in out["fits.json"]


def _md_rows(md: str) -> list[list[str]]:
    return [[c.strip() for c in line.strip().strip("|").split("|")] for line in md.splitlines()
            if line.startswith("|") and not set(line) <= set("|-: ")]


def _squash(page: str) -> str:
    return re.sub(r">\s+<", "><", page)


def test_roadmap_flags_rates_that_move_the_group_apart(subset):
    target, answers = subset
    assert "even split" not in answers.roadmap.note  # only gate_2q has a rate: the group moves together
    apart = parse_target(str(EXAMPLE_TOML.replace("[sweep]", '[sweep]\ncomponent_scales = [0.5]\ncomponents = '
                                                  '["gate_2q", "readout"]') + COSTS + ROADMAP
                             + "idle = {per_year = 0.2}\n"))
    from planner.planning import build_roadmap

    rm = build_roadmap(apart, answers.model, num_scenarios=0)
    assert "even split" in rm.note and "planner sweep TARGET" in rm.note
