"""One self-contained report page: report.html with the tables, the plots as data URIs, the device,
the goal, the sampling budget, the model and its fit quality, and the caveats.

No external resources (no scripts, fonts, stylesheets or image links); all text goes through
:func:`html.escape`. The tables come from :mod:`planner.reports.text`, the same layout as the
Markdown files, so the numbers are the same strings in both.
"""

from __future__ import annotations

import base64
import html
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from planner.config import Target
from planner.fits import CONFIDENCE
from planner.planning.model import not_sampled_note
from planner.planning.uncertainty import replica_interval
from planner.reports import text, verifyreport
from planner.reports.formats import INTERVAL_NOTE, POINT_VALUE, estimate, num
from planner.reports.table import Table

if TYPE_CHECKING:
    from planner.planning import Answers
    from planner.planning.verify import Verification

#: a (field, value) row of the page's key-value tables
Pair = tuple[str, str | int]

CAVEATS = (
    "Projections are model-based: they come from simulated memory experiments with a Pauli noise "
    "model built from the error budget in the target file, decoded with minimum-weight matching.",
    "Check them against the device: correlated, leakage and drift errors are not in the model.",
    "Answers outside the sampled scale range are extrapolations and say so.",
    "No substitute for the team's own validation.",
)


def answer_caveats(answers: Answers) -> list[str]:
    """The caveats of these answers: a response model that misfits, marginal verdicts, Lambda
    drifting with distance, and where the model-form part dominates the intervals."""
    req, model = answers.requirements, answers.model
    if req is None or model is None:
        return []
    out = []
    if req.model_misfit:
        out.append("The response model misfits its points (" + "; ".join(model.quality.misfit_reasons)
                   + "): every answer built on it is unreliable (marked !); its intervals include the misfit.")
    marginal = [a.lever for a in (req.joint, *req.components) if a.marginal]
    if marginal:
        out.append(f"Marginal, no verdict either way (flips with sampling noise or the model form): {', '.join(marginal)}.")
    drift = [f"{lf.axis}@{lf.factor:g}" for lf in answers.fits.lambdas if lf.drift is not None and lf.drift.significant]
    if drift:
        out.append(f"Lambda drifts with distance at {len(drift)} scale point(s) ({', '.join(drift[:6])}): "
                   "the spread between distance windows is in every interval; sample larger distances to pin it.")
    model_led = sorted(k for k, v in (answers.uncertainty.dominant if answers.uncertainty else {}).items() if v == "model")
    if model_led:
        out.append(f"The model-form part dominates {len(model_led)} interval(s) (e.g. {', '.join(model_led[:4])}): "
                   "more samples at the same distances would not shrink them.")
    return out

PLOT_CAPTIONS = {
    "logical_error_vs_distance": "Logical error per cycle against code distance for each scale point; "
                                 "dashed parts of the fitted lines are extrapolated towards the goal.",
    "lambda_vs_joint_scale": "Suppression factor Lambda against the joint scale factor, with its interval "
                             "band, the Lambda = 1 line and the threshold when the sampled range brackets it.",
    "lambda_vs_component_scale": "Lambda against each component's own scale factor (others at today), "
                                 "ticks at the sampled factors; today's point is shared by every line.",
    "inverse_lambda_budget": "Each component's share of 1/Lambda at today's point, error bars from the "
                             "bootstrap; components without their own sweep axis get no bar of their own, "
                             "one hatched bar gives their share together.",
    "roadmap": "Logical error per cycle at the candidate distances over time at the central rates, the "
               "band at the goal distance from the bootstrap models, the goal, and the physical qubits "
               "needed to meet it.",
}

#: which section each plot sits in, under that section's tables
PLOT_SECTIONS = {"logical_error_vs_distance": "fits", "lambda_vs_joint_scale": "fits",
                 "lambda_vs_component_scale": "fits", "inverse_lambda_budget": "sensitivity",
                 "roadmap": "roadmap"}

STYLE = """
body { font-family: system-ui, sans-serif; max-width: 1100px; margin: 2em auto; padding: 0 1em;
       color: #1b1b1b; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { border-bottom: 1px solid #ccd; padding-bottom: 0.2em; margin-top: 1.8em; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 0.88em; }
th, td { border: 1px solid #ccd; padding: 0.25em 0.5em; text-align: left; vertical-align: top; }
th { background: #eef0f6; }
.caveats { background: #fff4e5; border: 1px solid #e0a040; padding: 0.6em 1em; border-radius: 4px; }
.caveat { font-style: italic; color: #555; font-size: 0.9em; }
.lead { margin: 0.2em 0; }
figure { margin: 1em 0; }
figure img { max-width: 100%; border: 1px solid #dde; }
figcaption { font-size: 0.9em; color: #444; }
code { background: #f3f3f6; padding: 0 0.2em; }
"""


def esc(x: object) -> str:
    return html.escape(str(x), quote=True)


def table_html(t: Table, *, level: int = 3) -> str:
    """A :class:`~planner.reports.table.Table` as HTML (lead lines, table, notes, caveat)."""
    out = [f"<h{level}>{esc(t.title)}</h{level}>"]
    out += [f'<p class="lead">{esc(x)}</p>' for x in t.lead]
    out.append("<table><thead><tr>" + "".join(f"<th>{esc(h)}</th>" for h in t.headers) + "</tr></thead><tbody>")
    out += ["<tr>" + "".join(f"<td>{esc(c)}</td>" for c in r) + "</tr>" for r in t.rows]
    out.append("</tbody></table>")
    if t.all_notes:
        out.append("<ul>" + "".join(f"<li>{esc(n)}</li>" for n in t.all_notes) + "</ul>")
    out.append(f'<p class="caveat">{esc(t.caveat)}</p>')
    return "\n".join(out)


def _pairs(rows: Sequence[Pair]) -> str:
    return "<table><tbody>" + "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>" for k, v in rows) + \
        "</tbody></table>"


def device_rows(target: Target) -> list[Pair]:
    """What the target file says about the device, as (field, value) pairs with units."""
    d = target.device
    rows: list[Pair] = [("device", d.name), ("native two-qubit gate", d.native_2q)]
    if d.preset is not None:
        rows.append(("noise preset", f"{d.preset.model} at p = {num(d.preset.p)}"))
        return rows
    for key, value in d.errors.model_dump().items():
        if value is not None:
            unit = "average gate infidelity" if key.endswith("_infidelity") else "probability"
            rows.append((f"errors.{key} ({unit})", num(value)))
    if d.coherence is not None:
        rows += [("T1 (us)", num(d.coherence.t1_us)), ("T2 (us)", num(d.coherence.t2_us))]
    if d.durations is not None:
        rows += [(f"durations.{k} (ns)", num(v)) for k, v in d.durations.model_dump().items()]
    return rows


def sampling_rows(answers: Answers, target: Target, out_dir: Path | None) -> list[Pair]:
    """The sweep grid, the budget recorded in the out directory and what was sampled."""
    from planner.store import read_manifest

    sw = target.sweep
    tasks = answers.fits.tasks
    rows: list[Pair] = [
        ("code, decoder", f"{sw.code}, {sw.decoder}"),
        ("distances sampled", ", ".join(map(str, answers.fits.sampled_distances))),
        ("bases", ", ".join(sw.bases)),
        ("joint scale factors", ", ".join(num(x) for x in sw.joint_scales)),
        ("component scale factors", ", ".join(num(x) for x in sw.component_scales) or "none"),
        ("components with own axis", ", ".join(target.components) if sw.component_scales else "none"),
    ]
    manifest = None
    if out_dir is not None:
        try:
            manifest = read_manifest(Path(out_dir))
        except ValueError:  # an unreadable manifest is the store's concern, not the page's
            manifest = None
    if manifest is not None and manifest.max_errors is not None:
        rows.append(("budget (stopping rule per task)",
                     f"'{manifest.budget}': {manifest.max_errors:,} errors or {manifest.max_shots:,} shots"))
    else:
        rows.append(("budget (stopping rule per task)", "not recorded"))
    if tasks:
        rows += [("tasks", len(tasks)), ("shots (total)", f"{sum(t.shots for t in tasks):,}"),
                 ("logical errors (total)", f"{sum(t.errors for t in tasks):,}"),
                 ("fewest errors in one task", min(t.errors for t in tasks))]
    return rows


def model_rows(answers: Answers) -> list[Pair]:
    """The response model: its form, fit quality and weights (with bootstrap intervals over the
    replica models when there are any)."""
    m = answers.model
    if m is None:
        return [("response model", "none: " + "; ".join(answers.notes))]
    q = m.quality
    rows: list[Pair] = [
        ("form", f"{m.form}: 1/Lambda = sum over components of w_c s_c"
         + (" + v_c s_c^2" if m.form == "quadratic" else "") + "; ln A linear in the s_c; "
         "eps_d = A Lambda^(-(d+1)/2)"),
        ("fit quality", q.summary()),
        ("points fitted", q.num_points),
        ("chi2 per degree of freedom", num(q.chi2_per_dof)),
        ("largest |residual| (sigma)", num(q.max_abs_residual)),
        ("held-out largest |residual| (sigma)", num(q.loo_max_abs_residual)),
        ("worst point", q.worst_point),
    ]
    replicas = answers.uncertainty.models if answers.uncertainty is not None else ()
    how = "bootstrap interval" if replicas else POINT_VALUE
    for c, w in m.weights.items():
        if not m.is_sampled(c):
            rows.append((f"weight w_{c} (1/Lambda per unit scale)", "not sampled"))
            continue
        iv = replica_interval(w, [r.weights[c] for r in replicas]) if replicas else None
        rows.append((f"weight w_{c} (1/Lambda per unit scale; {how})", estimate(w, iv)))
    if m.unsampled:
        w = m.weight_together()
        iv = replica_interval(w, [r.weight_together() for r in replicas]) if replicas else None
        rows.append((f"not sampled separately: {', '.join(m.unsampled)} (weight together; {how})", estimate(w, iv)))
        rows.append(("to sample them", not_sampled_note(m.unsampled)))
    return rows


def figure_html(name: str, data: bytes) -> str:
    """One plot as an embedded PNG with its caption."""
    uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
    caption = PLOT_CAPTIONS.get(name, name)
    return (f'<figure><img alt="{esc(caption)}" src="{uri}"><figcaption>{esc(caption)} '
            f"({esc(f'{CONFIDENCE:.0%}')} intervals)</figcaption></figure>")


def _stage_sections(tables: Mapping[str, Sequence[Table]], plots_of: Callable[[str], list[str]],
                    verification: Verification | None, verification_note: str) -> list[str]:
    """Each stage's heading, tables and plots, in the order of the flow."""
    body = [table_html(t) for t in tables.get("fits", ())] + plots_of("fits")
    if "requirements" in tables:
        body += ["<h2>Requirements</h2>", *(table_html(t) for t in tables["requirements"])]
    if verification is not None or verification_note:
        body.append("<h2>Verification on the simulator</h2>")
        body += [f"<p>{esc(verification_note)}</p>"] if verification_note else []
        body += [table_html(t) for t in verifyreport.verify_tables(verification)] if verification is not None else []
    for key, heading in (("roadmap", "Roadmap"), ("sensitivity", "Sensitivity")):
        if key in tables:
            body += [f"<h2>{heading}</h2>", *(table_html(t) for t in tables[key]), *plots_of(key)]
    others = plots_of("other")
    return body + (["<h2>Other plots</h2>", *others] if others else [])


def report_html(answers: Answers, *, target: Target, pngs: Mapping[str, bytes],
                out_dir: Path | None = None, verification: Verification | None = None,
                verification_note: str = "", tables: Mapping[str, Sequence[Table]] | None = None) -> str:
    """The page as text (``pngs``: PNG bytes by plot name, from plots.render_all). Order: the
    caveats, device and goal, sampling, then each stage's tables with its plots under them.
    ``verification``: the result of ``planner verify`` (a section after the requirements);
    ``verification_note``: said in that section instead (e.g. the result is out of date);
    ``tables``: the report's tables by stage (:func:`planner.reports.text.report_tables`, the ones
    the Markdown files hold; built here when not given)."""
    goal = target.goal
    tables = text.report_tables(answers) if tables is None else tables
    plots_of = lambda section: [figure_html(n, d) for n, d in pngs.items()  # noqa: E731
                                if PLOT_SECTIONS.get(n, "other") == section]
    body = [f"<h1>Error-budget report: {esc(target.device.name)}</h1>",
            f"<p>Target <code>{esc(target.name)}</code>, sha256 <code>{esc(target.sha256[:16])}</code>. "
            f"{esc(INTERVAL_NOTE)}</p>",
            '<div class="caveats"><strong>Caveats</strong><ul>'
            + "".join(f"<li>{esc(c)}</li>" for c in (*CAVEATS, *answer_caveats(answers))) + "</ul></div>",
            "<h2>Device and goal</h2>", _pairs(device_rows(target)),
            _pairs([("goal: logical error per cycle", num(goal.logical_error_per_cycle)),
                    ("goal: largest code (physical qubits)", goal.max_qubits)]),
            "<h2>Sampling</h2>", _pairs(sampling_rows(answers, target, out_dir)),
            "<h2>Fits and model</h2>", _pairs(model_rows(answers)),
            *_stage_sections(tables, plots_of, verification, verification_note)]
    if answers.notes:
        body.append("<h2>Notes</h2><ul>" + "".join(f"<li>{esc(n)}</li>" for n in answers.notes) + "</ul>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{esc('planner report: ' + target.device.name)}</title>"
            f"<style>{STYLE}</style></head><body>\n" + "\n".join(body) + "\n</body></html>\n")
