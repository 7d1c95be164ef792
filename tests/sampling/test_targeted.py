"""Precision-targeted sampling: the pure allocator on synthetic inputs (deterministic), the delta
method against the fit's own intervals, and a small targeted sweep that stops and resumes."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from rich.console import Console

from planner.config import EXAMPLE_TOML, load_target
from planner.errors import InputError
from planner.fits import Z_SCORE
from planner.jobs.status import status_precision
from planner.jobs.sweep import run_targeted
from planner.sampling import shot_caps
from planner.sampling.allocate import allocate
from planner.planning.precision import assess
from planner.store import SampleStore
from planner.sweep import StoppingRule, plan_sweep

INF = math.inf


def quiet() -> Console:
    return Console(stderr=True, quiet=True)


# ---------------------------------------------------------------------------------------------
# the allocator (pure, deterministic)


def test_allocator_prefers_cheap_informative_tasks() -> None:
    # one answer fed equally by two tasks; task 1 costs 100x more per shot: the cost-optimal
    # split of V = S/n0 + S/n1 has n0/n1 = sqrt(c1/c0) = 10 (Lagrange; common practice, no source)
    a = allocate(shots=[1000, 1000], rates=[0.01, 0.01], cost_per_shot=[1e-6, 1e-4],
                 sensitivity=[[1.0, 1.0]], target_variance=[1e-5], max_shots=[INF, INF],
                 min_errors=1)
    assert a.met
    n0, n1 = 1000 + a.extra_shots[0], 1000 + a.extra_shots[1]
    assert 5 < n0 / n1 < 20
    assert 1 / n0 + 1 / n1 <= 1e-5 * (1 + 1e-6)
    # an informative task beats an uninformative one at equal cost
    b = allocate(shots=[1000, 1000], rates=[0.01, 0.01], cost_per_shot=[1e-6, 1e-6],
                 sensitivity=[[1.0, 0.01]], target_variance=[1e-4], max_shots=[INF, INF],
                 min_errors=1)
    assert b.extra_shots[0] > 20 * b.extra_shots[1]


def test_allocator_gives_every_task_of_an_answer_its_minimum() -> None:
    # task 2 is nearly useless and very expensive, task 3 enters no answer: task 2 still gets
    # min_errors expected errors, task 3 gets nothing
    a = allocate(shots=[0, 0, 0, 0], rates=[0.1, 0.1, 0.001, 0.1], cost_per_shot=[1e-6, 1e-6, 1e-2, 1e-6],
                 sensitivity=[[1.0, 1.0, 1e-9, 0.0]], target_variance=[1e-3], max_shots=[INF] * 4,
                 min_errors=20)
    assert a.extra_shots[2] >= 20 / 0.001
    assert a.extra_shots[3] == 0
    assert all(x * r >= 20 for x, r in zip(a.extra_shots[:2], (0.1, 0.1)))
    assert a.met and not a.capped


def test_allocator_stops_a_task_at_its_cap_and_reports_it() -> None:
    # task 0 is the best buy but capped at 5000 shots; the others must take over
    a = allocate(shots=[1000, 1000, 1000], rates=[0.01] * 3, cost_per_shot=[1e-6, 1e-5, 1e-5],
                 sensitivity=[[1.0, 1.0, 1.0]], target_variance=[3e-4], max_shots=[5000, INF, INF],
                 min_errors=1)
    assert a.extra_shots[0] == 4000 and min(a.extra_shots[1:]) > 4000
    assert a.met and a.capped == ()  # met in the end: the cap did not stop an answer
    # every task capped below what the answer needs: not met, the capped tasks are named
    b = allocate(shots=[1000, 1000], rates=[0.01] * 2, cost_per_shot=[1e-6, 1e-6],
                 sensitivity=[[1.0, 1.0]], target_variance=[1e-5], max_shots=[5000, 8000],
                 min_errors=1)
    assert not b.met and b.unmet == (0,)
    # as precise as the caps allow (within 10% of the floor 1/5000 + 1/8000), on finite shots
    assert b.extra_shots[0] == 4000 and 5000 < b.extra_shots[1] <= 7000
    assert b.projected_variance[0] <= 1.1 * (1 / 5000 + 1 / 8000) * (1 + 1e-6)
    assert 0 in b.capped
    # a task that cannot even reach its minimum within its cap is reported as starved
    c = allocate(shots=[0, 0], rates=[1e-6, 0.1], cost_per_shot=[1e-6, 1e-6],
                 sensitivity=[[1.0, 1.0]], target_variance=[1.0], max_shots=[1000, INF], min_errors=20)
    assert c.starved == (0,) and 0 in c.capped and c.extra_shots[0] == 1000


def test_allocator_meets_every_answer_and_is_deterministic() -> None:
    rng = np.random.default_rng(7)
    sens = rng.uniform(0, 1, size=(4, 9)) * (rng.uniform(size=(4, 9)) > 0.4)
    kwargs = dict(shots=rng.integers(100, 10_000, 9), rates=rng.uniform(0.001, 0.1, 9),
                  cost_per_shot=rng.uniform(1e-7, 1e-4, 9), sensitivity=sens,
                  target_variance=rng.uniform(1e-5, 1e-4, 4), max_shots=[INF] * 9, min_errors=5)
    a, b = allocate(**kwargs), allocate(**kwargs)
    assert a == b and a.met
    n = np.asarray(kwargs["shots"], float) + np.array(a.extra_shots)
    v = (sens / n).sum(axis=1)
    assert np.all(v <= np.asarray(kwargs["target_variance"]) * (1 + 1e-6))


def test_allocator_rejects_bad_inputs() -> None:
    with pytest.raises(ValueError):
        allocate(shots=[1], rates=[0.1], cost_per_shot=[0.0], sensitivity=[[1.0]],
                 target_variance=[1.0], max_shots=[INF])
    with pytest.raises(ValueError):
        allocate(shots=[1, 2], rates=[0.1], cost_per_shot=[1.0, 1.0], sensitivity=[[1.0, 1.0]],
                 target_variance=[1.0], max_shots=[INF, INF])


def test_shot_caps_from_cpu_and_budget() -> None:
    caps = shot_caps(stats=[None, None], costs=[1e-3, 1e-5], max_cpu_seconds_per_task=10.0,
                     budget_cap=StoppingRule(max_errors=100, max_shots=50_000))
    assert caps.tolist() == [10_000.0, 50_000.0]


# ---------------------------------------------------------------------------------------------
# a small targeted sweep (samples with sinter)


@pytest.fixture(scope="module")
def tiny(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, object]:
    d = tmp_path_factory.mktemp("tiny")
    src = d / "tiny.toml"
    # EXAMPLE_TOML: d = 3, 5, joint 0.5 and 1.0; plus one component axis point for gate_2q
    src.write_text(EXAMPLE_TOML + 'component_scales = [0.5]\ncomponents = ["gate_2q"]\n')
    return d, load_target(src)


@pytest.fixture(scope="module")
def swept(tiny: tuple[Path, object]) -> tuple[Path, object, object]:
    d, target = tiny
    out = d / "out"
    summary = run_targeted(plan_sweep(target).tasks, store=SampleStore(out), target=target,
                           precision=0.25, workers=2, console=quiet())
    return out, target, summary


@pytest.mark.slow
def test_targeted_sweep_reaches_its_precision(swept: tuple[Path, object, object]) -> None:
    out, target, summary = swept
    assert summary.met and summary.new_shots > 0 and summary.rounds >= 2
    kinds = {a.kind for a in summary.answers}
    assert kinds == {"lambda", "weights", "joint_factor"}
    assert all(a.relative_width <= 0.25 for a in summary.answers)
    # the reported precision is the fit's own: Lambda's delta-method width agrees with the
    # likelihood-ratio interval of the fit when the line does not scatter (common practice,
    # no source: the two differ by O(1/errors) at these counts)
    again = assess(SampleStore(out).stats(), target, precision=0.25)
    by_name = {f"lambda {lf.axis}@{lf.factor:g}": lf for lf in again.report.lambdas}
    compared = 0
    for a in again.answers:
        if a.kind == "lambda" and a.fit_relative_width is not None:
            # undo the fit's sqrt(chi2/dof) widening (only with 3+ distances) before comparing
            widening = math.sqrt(max(by_name[a.name].chi2_per_dof or 1.0, 1.0))
            assert a.relative_width == pytest.approx(a.fit_relative_width / widening, rel=0.35)
            compared += 1
    assert compared == sum(a.kind == "lambda" for a in again.answers) >= 3
    # the out directory is prepared as by run_sweep: manifest and target copy
    assert (out / "manifest.json").is_file() and (out / "target.toml").is_file()


@pytest.mark.slow
def test_resumed_targeted_sweep_samples_nothing(swept: tuple[Path, object, object]) -> None:
    out, target, _ = swept
    store = SampleStore(out)
    before = {s.strong_id: s.shots for s in store.stats()}
    again = run_targeted(plan_sweep(target).tasks, store=store, target=target, precision=0.25,
                         workers=2, console=quiet())
    assert again.met and again.new_shots == 0 and again.rounds == 0
    assert {s.strong_id: s.shots for s in store.stats()} == before


@pytest.mark.slow
def test_tighter_precision_resumes_and_only_adds(swept: tuple[Path, object, object], tmp_path: Path) -> None:
    out, target, _ = swept
    # a copy, so the other tests keep their store
    import shutil

    copy = tmp_path / "copy"
    shutil.copytree(out, copy)
    store = SampleStore(copy)
    before = {s.strong_id: s.shots for s in store.stats()}
    # Lambda and the joint factor at 0.6x the worst width they have now: needs more shots
    focus = ("lambda", "joint_factor")
    now = assess(store.stats(), target, precision=0.25, focus=focus)
    tighter = 0.6 * max(a.relative_width for a in now.answers)
    rows = status_precision(store, target, tighter, focus=focus)
    assert {r.state for r in rows} <= {"precise", "sample", "capped"}
    assert any(r.state == "sample" for r in rows)
    planned = {r.strong_id: r.extra_shots for r in rows}
    assert all(r.cpu_seconds_to_target is not None and r.cpu_seconds_to_target >= 0 for r in rows)
    res = run_targeted(plan_sweep(target).tasks, store=store, target=target, precision=tighter,
                       workers=2, console=quiet(), focus=focus)
    after = {s.strong_id: s.shots for s in store.stats()}
    assert all(after[k] >= v for k, v in before.items())  # append-only: nothing lost
    # tasks the plan left alone were not resampled in its first round (later rounds may add)
    untouched = [k for k, x in planned.items() if x == 0]
    assert res.met and res.new_shots == sum(after.values()) - sum(before.values())
    assert len(untouched) < len(planned)


@pytest.mark.slow
def test_cpu_cap_stops_tasks_and_reports_them(tiny: tuple[Path, object], tmp_path: Path) -> None:
    _, target = tiny
    tasks = [t for t in plan_sweep(target).tasks if t.json_metadata["axis"] == "joint"]
    res = run_targeted(tasks, store=SampleStore(tmp_path / "capped"), target=target, precision=0.01,
                       workers=2, console=quiet(), max_cpu_seconds_per_task=0.05,
                       focus=("lambda_today",))
    assert not res.met and res.capped
    # stopped by the cap, not by reaching the precision: a relative 95% half-width of 1% needs about
    # (1.96 / 0.01)^2 = 38,416 errors on a task (binomial rate, common practice); a check on the
    # errors, not on measured seconds, so a loaded machine cannot turn it red
    assert max(s.errors for s in res.totals) < (1.96 / 0.01) ** 2
    assert any("cap" in n for n in res.notes)


def test_bad_precision_is_an_input_error(tiny: tuple[Path, object], tmp_path: Path) -> None:
    _, target = tiny
    with pytest.raises(InputError, match="--precision"):
        run_targeted([], store=SampleStore(tmp_path), target=target, precision=1.5, console=quiet())


def test_target_variance_matches_precision() -> None:
    from planner.planning.precision import AnswerPrecision, Assessment

    a = Assessment(answers=(AnswerPrecision(name="x", kind="lambda", value=2.0, relative_half_width=0.1, target=0.05),),
                   task_ids=(), sensitivity=np.zeros((1, 0)), report=None, model=None)
    assert a.target_variance()[0] == pytest.approx((0.05 * 2.0 / Z_SCORE) ** 2)
