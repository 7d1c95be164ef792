"""The leakage sampler (planner.sampling.leakage) against the Pauli sampler, the rate equations and
the expected effect of one leaked measure qubit. Everything here samples (marked slow); intervals
are sinter's likelihood-ratio intervals (sinter.fit_binomial)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import sinter

from planner.circuits import build_memory_circuit
from planner.config import EXAMPLE_TOML, load_target
from planner.fits.rates import per_cycle_interval
from planner.noise import NoiseModel
from planner.planning.leakage import population_curve
from planner.sampling.leakage import CompiledLeakageSampler, leakage_samplers
from planner.sweep import resolved_task
ROOT = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.slow

DEMO = load_target(ROOT / "targets" / "demo.toml")
MODEL = NoiseModel.from_target(DEMO)
DURATIONS = {"gate_1q_ns": 25.0, "gate_2q_ns": 35.0, "measure_ns": 550.0, "reset_ns": 150.0}
ZERO = {"gate_2q": 0.0, "heating_per_us": 0.0, "decay_per_round": 0.0, "transport": 0.0,
        "partner_px": 0.25, "partner_py": 0.25, "partner_pz": 0.25, "readout": "one",
        "reset_removal": 0.0, "data_removal": 0.0, **DURATIONS}


def _circuit(d: int, rounds: int, basis: str = "z"):
    return build_memory_circuit(MODEL, code="surface", distance=d, rounds=rounds, basis=basis)


def _sampler(circuit, params, **kw) -> CompiledLeakageSampler:
    task = resolved_task(sinter.Task(circuit=circuit, decoder="pymatching+leakage",
                                     json_metadata={"leakage": params}))
    return CompiledLeakageSampler(task, seed=1234, **kw)


def test_zero_leakage_matches_the_pauli_sampler_d3_5_7_both_bases():
    # with every leakage rate zero the leakage sampler simulates the Pauli circuit: the logical
    # error per cycle agrees with stim's compiled sampler (through sinter, custom sampler and
    # built-in decoder alike) within intervals. 400 errors per task: intervals about +-10%
    tasks = []
    for d in (3, 5, 7):
        for basis in ("z", "x"):
            c = _circuit(d, d, basis)
            meta = {"d": d, "basis": basis}
            tasks.append(sinter.Task(circuit=c, decoder="pymatching", json_metadata={**meta, "leakage": None}))
            tasks.append(sinter.Task(circuit=c, decoder="pymatching+leakage",
                                     json_metadata={**meta, "leakage": ZERO}))
    stats = sinter.collect(num_workers=2, tasks=tasks, max_errors=400, max_shots=400_000,
                           custom_decoders=leakage_samplers())
    assert len(stats) == 12
    by = {(s.json_metadata["d"], s.json_metadata["basis"], s.decoder): s for s in stats}
    for d in (3, 5, 7):
        for basis in ("z", "x"):
            pauli, leak = by[(d, basis, "pymatching")], by[(d, basis, "pymatching+leakage")]
            _, a = per_cycle_interval(shots=pauli.shots, errors=pauli.errors, rounds=d)
            _, b = per_cycle_interval(shots=leak.shots, errors=leak.errors, rounds=d)
            assert leak.errors >= 400 and a.overlaps(b), (d, basis, a, b)


def _sampled_fraction(hits: float, n: int) -> sinter.Fit:
    # about 4.8 sigma: 30 comparisons below must all hold, so each needs a wide interval
    return sinter.fit_binomial(num_shots=n, num_hits=int(hits), max_likelihood_factor=1e5)


def test_leaked_population_follows_the_rate_equations():
    # transport 0: qubits leak independently, so the rate equations are exact and the sampled
    # counts are binomial over (qubits x shots)
    params = {**ZERO, "gate_2q": 2e-3, "heating_per_us": 5e-4, "decay_per_round": 0.05,
              "reset_removal": 0.6, "data_removal": 0.1}
    rounds = 15
    circuit = _circuit(3, rounds)
    sampler = _sampler(circuit, params)
    trace = sampler.new_trace(rounds)
    for _ in range(8):
        sampler.simulate(2048, trace)
    curve = population_curve(circuit, params)
    n_data, n_meas = trace.num_data * trace.shots, trace.num_measure * trace.shots
    for r in range(rounds):
        fd = _sampled_fraction(trace.data_leaked[r], n_data)
        fm = _sampled_fraction(trace.measure_leaked[r], n_meas)
        assert fd.low <= curve.data[r] <= fd.high, (r, fd, curve.data[r])
        assert fm.low <= curve.measure[r] <= fm.high, (r, fm, curve.measure[r])
    # data qubits build up (no full removal), and the last rounds sit near the steady state
    assert curve.data[-1] > 3 * curve.data[0]
    assert abs(curve.data[-1] - curve.steady_data) < 0.25 * curve.steady_data


def test_multi_level_reset_clears_measure_qubits_every_round():
    # full reset removal: a measure qubit is never leaked at the end of a round (the reset just
    # cleared it), while data qubits keep leaking
    params = {**ZERO, "gate_2q": 5e-3, "reset_removal": 1.0}
    sampler = _sampler(_circuit(3, 6), params)
    trace = sampler.new_trace(6)
    sampler.simulate(1024, trace)
    assert trace.measure_leaked.sum() == 0
    assert trace.data_leaked[-1] > 0


def _neighbour_detection(removal: float | None, rounds: int = 8, shots: int = 8192) -> tuple[int, int]:
    """Detection events and detector-shots of the detectors of rounds >= 3 other than the leaked
    measure qubit's own, with that qubit leaked after the initial reset (None: no leaked qubit)."""
    circuit = _circuit(3, rounds)
    sampler = _sampler(circuit, {**ZERO, "reset_removal": removal or 0.0}, every_layer=True)
    ancilla = int(sampler.measure[0])
    coords = circuit.get_detector_coordinates()
    qcoords = circuit.get_final_qubit_coordinates()[ancilla]
    keep = np.array([i for i in range(circuit.num_detectors)
                     if sampler.det_rounds[i] >= 3 and list(coords[i][:2]) != list(qcoords)])
    hits = 0
    for _ in range(shots // 1024):
        dets, _ = sampler.simulate(1024, leaked_after_first_layer=[ancilla] if removal is not None else ())
        hits += int(dets[keep].sum())
    return hits, len(keep) * shots


def test_a_leaked_measure_qubit_raises_its_neighbours_detections_unless_removed():
    pauli = _neighbour_detection(None)
    stuck = _neighbour_detection(0.0)  # never removed: a leaked partner in every CZ of every round
    cleared = _neighbour_detection(1.0)  # removed by the first reset
    fit = lambda h_n: sinter.fit_binomial(num_shots=h_n[1], num_hits=h_n[0], max_likelihood_factor=1e3)  # noqa: E731
    p, s, c = fit(pauli), fit(stuck), fit(cleared)
    assert s.low > 1.3 * p.high, (p, s)  # clearly raised (the partner channel is 3/4 per gate)
    assert c.low <= p.high and p.low <= c.high, (p, c)  # back to the Pauli value


LEAKY_TOML = EXAMPLE_TOML.replace("[goal]", "[device.leakage]\ngate_2q = 1e-3\ndecay_per_round = 0.1\n\n[goal]").replace(
    "[sweep]", "[sweep]\ncomponent_scales = [0.5]\ncomponents = [\"gate_2q\", \"leakage\"]")


def test_a_sweep_with_leakage_samples_through_sinter_into_the_store_and_the_answers(sample_once):
    # the local engine hands sinter the leakage sampler; the store, the fits and ask use it unchanged
    import json

    from typer.testing import CliRunner

    from planner.cli import app
    from planner.sweep import StoppingRule

    sampled = sample_once(LEAKY_TOML, rule=StoppingRule(max_errors=80, max_shots=20_000), workers=2)
    runner = CliRunner()
    status = runner.invoke(app, ["status", str(sampled.out), "--json"])
    assert status.exit_code == 0, status.stderr
    tasks = json.loads(status.stdout)["tasks"]
    assert tasks and all(t["decoder"] == "pymatching+leakage" and t["shots"] > 0 for t in tasks)
    ask = runner.invoke(app, ["ask", str(sampled.out), "--json"])
    assert ask.exit_code == 0, ask.stderr
    levers = {c["lever"] for c in json.loads(ask.stdout)["components"]}
    assert "leakage" in levers


def test_leakage_command_json_and_files(tmp_path):
    # a small study (no comparison: --errors 0): one JSON object on stdout, the files written
    import json

    from typer.testing import CliRunner

    from planner.cli import app

    path = tmp_path / "t.toml"
    path.write_text(LEAKY_TOML)
    out = tmp_path / "out"
    res = CliRunner().invoke(app, ["leakage", str(path), "-d", "3", "-r", "4", "--shots", "512",
                                   "--errors", "0", "--out", str(out), "--json"])
    assert res.exit_code == 0, res.stderr
    doc = json.loads(res.stdout)
    assert [d["rounds"] for d in doc["depths"]] == [1, 2, 4] and doc["variants"] == []
    assert len(doc["rate_equations"]["data"]) == 4 and doc["removal_lever"] is None
    assert {p.name for p in out.iterdir()} == {"leakage.json", "leakage_population.csv", "leakage.png"}


def test_the_dask_engine_passes_leakage_tasks_to_its_workers(tmp_path):
    # chunks carry the leakage parameters to the worker, which samples with the leakage sampler
    from rich.console import Console

    from planner.config import parse_target
    from planner.sampling import run_sweep
    from planner.store import SampleStore
    from planner.sweep import StoppingRule, plan_sweep

    target = parse_target(EXAMPLE_TOML.replace("[goal]", "[device.leakage]\ngate_2q = 1e-3\n\n[goal]"))
    summary = run_sweep(plan_sweep(target).tasks, store=SampleStore(tmp_path), cluster="local:1",
                        rule=StoppingRule(max_errors=50, max_shots=2000), console=Console(stderr=True, quiet=True))
    stats = SampleStore(tmp_path).stats()
    assert summary.new_shots > 0 and stats
    assert {s.decoder for s in stats} == {"pymatching+leakage"} and all(s.shots >= 256 for s in stats)
