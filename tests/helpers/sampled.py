"""Sampled out directories for tests: each distinct configuration is sampled once per session.

``SampleOnce`` (the ``sample_once`` fixture in ``tests/conftest.py``) samples a target text into a
fresh out directory the first time a configuration is asked for and hands the same directory to
every later caller, whichever module asks. The directory is shared: a test that writes into an out
directory works on :func:`copy_out` of it.

Two ways to sample, as the tests did before they shared: a budget name runs ``planner sweep``
(the command under test, its exit code checked), a custom :class:`~planner.sweep.StoppingRule` runs
:func:`planner.sampling.run_sweep` (the command has no option for a custom rule).
"""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

from planner.sweep import StoppingRule


@dataclasses.dataclass(frozen=True)
class Sampled:
    """A target file and the out directory sampled from it (shared: copy before writing)."""

    target: Path
    out: Path


def copy_out(sampled: Sampled | Path, dest: Path) -> Path:
    """A private copy of a sampled out directory at ``dest`` (which must not exist yet)."""
    src = sampled.out if isinstance(sampled, Sampled) else sampled
    shutil.copytree(src, dest)
    return dest


class SampleOnce:
    """Sample each distinct (target text, budget or rule, workers, out name) once, under ``root``."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.made: dict[tuple[object, ...], Sampled] = {}

    def __call__(self, toml: str, *, budget: str = "quick", rule: StoppingRule | None = None,
                 workers: int = 2, out_name: str = "out") -> Sampled:
        key = (toml, None if rule is not None else budget, rule, workers, out_name)
        if key not in self.made:
            place = self.root / f"config-{len(self.made)}"
            place.mkdir(parents=True)
            target = place / "target.toml"
            target.write_text(toml)
            out = place / out_name
            if rule is None:
                self._sweep_command(target, out, budget=budget, workers=workers)
            else:
                self._run_sweep(target, out, rule=rule, workers=workers)
            self.made[key] = Sampled(target=target, out=out)
        return self.made[key]

    @staticmethod
    def _sweep_command(target: Path, out: Path, *, budget: str, workers: int) -> None:
        from typer.testing import CliRunner

        from planner.cli import app

        res = CliRunner().invoke(app, ["sweep", str(target), "--out", str(out), "--budget", budget,
                                       "--workers", str(workers), "--quiet"])
        assert res.exit_code == 0, res.output

    @staticmethod
    def _run_sweep(target: Path, out: Path, *, rule: StoppingRule, workers: int) -> None:
        from rich.console import Console

        from planner.config import load_target
        from planner.sampling import run_sweep
        from planner.store import SampleStore
        from planner.sweep import plan_sweep

        spec = load_target(target)
        run_sweep(plan_sweep(spec).tasks, store=SampleStore(out), rule=rule, workers=workers, target=spec,
                  console=Console(stderr=True, quiet=True))
