"""Packaging and the project's own files: the distribution name, the console script, the make
targets the README promises."""

from __future__ import annotations

import importlib.metadata as md
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DIST = "qec-budget-planner"  # "planner" on the package index is an unrelated project


def test_the_installed_distribution_has_its_own_name() -> None:
    assert tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["name"] == DIST
    dist = md.distribution(DIST)
    assert dist.metadata["Name"] == DIST
    # the import package planner comes from this distribution, not from another one
    assert set(md.packages_distributions().get("planner", [])) == {DIST}
    with pytest.raises(md.PackageNotFoundError):
        md.distribution("planner")  # the unrelated project (or a stale install) is not here


def test_the_planner_console_script_exists_and_runs() -> None:
    scripts = {ep.name: ep.value for ep in md.distribution(DIST).entry_points
               if ep.group == "console_scripts"}
    assert scripts == {"planner": "planner.cli:main"}
    exe = Path(sys.executable).parent / "planner"
    assert exe.is_file(), exe
    done = subprocess.run([str(exe), "--help"], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "sweep" in done.stdout and "ask" in done.stdout


def test_every_install_line_names_the_distribution_or_the_checkout() -> None:
    """No ``pip install planner...`` anywhere: that installs the unrelated project."""
    bad = []
    for name in ("README.md", "Makefile", "pyproject.toml", "scripts/cluster_check.sh"):
        for n, line in enumerate((ROOT / name).read_text().splitlines(), 1):
            if re.search(r"pip install[^\n]*?['\"\s]planner(\[|['\"\s]|$)", line):
                bad.append(f"{name}:{n}: {line.strip()}")
    assert bad == []


def test_cluster_check_is_a_make_target_outside_make_test() -> None:
    make = (ROOT / "Makefile").read_text()
    assert re.search(r"^cluster-check:.*\n\tbash scripts/cluster_check\.sh$", make, re.M)
    test_recipe = re.search(r"^test:.*\n((?:\t.*\n)+)", make, re.M)
    assert test_recipe and "cluster" not in test_recipe[1]
    assert "cluster-check" not in (ROOT / ".ci" / "run").read_text()


# ---------------------------------------------------------------------------------------------
# make cluster-check's helper: the README's Slurm recipe adapted to one node, the totals check


def _recipe_module():
    import importlib.util

    spec = importlib.util.spec_from_file_location("cluster_check_recipe",
                                                  ROOT / "scripts" / "cluster_check_recipe.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)  # type: ignore[union-attr]
    return mod


SITE = {"queue": "'cpu'", "account": "'acct'", "cores": "1", "processes": "1", "memory": "'2GiB'",
        "walltime": "'00:30:00'", "interface": "'eth0'",
        "scheduler_options": "{'port': 4321, 'interface': 'eth0'}",
        "job_script_prologue": "['source /venv/bin/activate']"}


def test_the_readme_slurm_recipe_is_what_cluster_check_runs() -> None:
    mod = _recipe_module()
    code = mod.recipe((ROOT / "README.md").read_text())
    assert "SLURMCluster(" in code and "print(cluster.scheduler_address" in code
    adapted = mod.adapt(code, SITE, jobs=2)
    compile(adapted, "slurm_cluster.py", "exec")
    assert "scheduler_options={'port': 4321, 'interface': 'eth0'}," in adapted
    assert "job_script_prologue=['source /venv/bin/activate']," in adapted
    assert "cluster.scale(jobs=2)" in adapted
    # everything but the site values is the README's text, line for line
    kept = [a for a, b in zip(code.splitlines(), adapted.splitlines()) if a == b]
    assert len(code.splitlines()) == len(adapted.splitlines()) and len(kept) >= 5


def test_cluster_check_refuses_a_recipe_parameter_it_does_not_know() -> None:
    mod = _recipe_module()
    code = mod.recipe((ROOT / "README.md").read_text())
    changed = code.replace("    walltime=", "    gpus_per_job=2,\n    walltime=", 1)
    assert changed != code
    with pytest.raises(SystemExit, match="gpus_per_job"):
        mod.adapt(changed, SITE, jobs=2)


def _fake_out(tmp_path: Path, rows: list[tuple[str, int, int]]) -> Path:
    import json

    import sinter

    out = tmp_path / "out"
    (out / "samples").mkdir(parents=True)
    lines = [sinter.CSV_HEADER] + [
        sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=None, shots=shots,
                         errors=errors).to_csv_line() for sid, shots, errors in rows]
    (out / "samples" / "a.csv").write_text("\n".join(lines) + "\n")
    ids = sorted({sid for sid, _, _ in rows})
    (out / "manifest.json").write_text(json.dumps({"tasks": [{"strong_id": s} for s in ids]}))
    return out


@pytest.mark.parametrize(("planner_says", "agree"), [
    ({"a": (1_500, 1_000), "b": (2_000_000, 3)}, True),  # sums per id over rows; b met by shots
    ({"a": (1_500, 999), "b": (2_000_000, 3)}, False),  # planner's count differs from sinter's
    ({"a": (1_500, 1_000)}, False),  # a manifest task missing from status
])
def test_cluster_check_totals(tmp_path: Path, planner_says: dict, agree: bool,
                              capsys: pytest.CaptureFixture[str]) -> None:
    import argparse
    import json

    mod = _recipe_module()
    out = _fake_out(tmp_path, [("a", 1_000, 600), ("a", 500, 400), ("b", 2_000_000, 3)])
    status = tmp_path / "status.json"
    status.write_text(json.dumps({"tasks": [{"strong_id": k, "shots": s, "errors": e}
                                            for k, (s, e) in planner_says.items()]}))
    args = argparse.Namespace(out_dir=str(out), status_json=str(status), errors=1_000,
                              shots=1_000_000)
    if agree:
        mod.totals(args)
        assert "sinter and planner agree: yes" in capsys.readouterr().out
    else:
        with pytest.raises(SystemExit):
            mod.totals(args)


# ---------------------------------------------------------------------------------------------
# the README states what the code does


def _readme() -> str:
    return (ROOT / "README.md").read_text()


def test_the_readme_defines_every_budget_as_the_code_does() -> None:
    from planner.sweep import BUDGETS

    rows = {m[1]: (int(m[2].replace(",", "")), int(m[3].replace(",", "")))
            for m in re.finditer(r"^\s*\| `(\w+)` \| ([\d,]+) \| ([\d,]+) \|", _readme(), re.M)}
    assert rows == {name: (rule.max_errors, rule.max_shots) for name, rule in BUDGETS.items()}


@pytest.mark.parametrize("command", ["planner run", "planner sweep"])
def test_the_command_table_lists_the_sampling_options(command: str) -> None:
    row = next(line for line in _readme().splitlines()
               if line.startswith("|") and f"`{command} " in line)
    for option in ("--workers N", "--budget", "--precision REL"):
        assert option in row, (option, row)


def test_the_readme_names_no_setting_a_user_cannot_set() -> None:
    # the per-task CPU cap of a targeted sweep is a library argument, not a target key or option
    assert "max_cpu_seconds_per_task" not in _readme()
