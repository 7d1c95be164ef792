"""Per-qubit and per-pair tables: read (inline and CSV), checked, placed in the circuit, and the
layout they are keyed by."""

from __future__ import annotations

from pathlib import Path

import pytest
import stim
from typer.testing import CliRunner

from planner.circuits import build_memory_circuit, layout_rows, qubit_layout
from planner.cli import app
from planner.config import EXAMPLE_TOML, load_target, parse_target
from planner.noise import NoiseModel

runner = CliRunner()

COMPONENT = {"gate_1q": 0.001, "readout": 0.01, "reset": 0.002, "t1_us": 50.0, "t2_us": 40.0}


def with_tables(extra: str) -> str:
    """EXAMPLE_TOML with ``extra`` (device keys or sub-tables) put into its device section."""
    return EXAMPLE_TOML.replace("[goal]", f"{extra}\n[goal]")


def write_target(tmp_path: Path, extra: str, files: dict[str, str] | None = None) -> Path:
    for name, text in (files or {}).items():
        (tmp_path / name).write_text(text)
    path = tmp_path / "chip.toml"
    text = with_tables(extra)
    if "qubit_table" in extra or "pair_table" in extra:
        # plain keys of [device] must come before its sub-tables
        text = EXAMPLE_TOML.replace('native_2q = "cz"\n', f'native_2q = "cz"\n{extra}\n')
    path.write_text(text)
    return path


def circuit_of(target_text_or_path: str | Path, *, distance: int = 3, basis: str = "z") -> stim.Circuit:
    t = load_target(target_text_or_path) if isinstance(target_text_or_path, Path) else parse_target(target_text_or_path)
    return build_memory_circuit(NoiseModel.from_target(t), code="surface", distance=distance, rounds=3, basis=basis)


def identity_csv(distance: int) -> tuple[str, str]:
    """A qubit table and a pair table listing every qubit and pair of the patch at exactly the
    component values of EXAMPLE_TOML."""
    lay = qubit_layout(code="surface", distance=distance)
    qubits = ["x,y,gate_1q,readout,reset,t1_us,t2_us,idle_excess,idle_measure_excess"]
    qubits += [f"{q.coords[0]:g},{q.coords[1]:g},0.001,0.01,0.002,50,40,0,0" for q in lay.qubits]
    pairs = ["x1,y1,x2,y2,gate_2q"]
    pairs += [f"{a[0]:g},{a[1]:g},{b[0]:g},{b[1]:g},0.005" for a, b in lay.pairs]
    return "\n".join(qubits) + "\n", "\n".join(pairs) + "\n"


# ---------------------------------------------------------------------------------------------
# circuits


@pytest.mark.parametrize("basis", ["z", "x"])
def test_a_table_at_the_component_values_gives_the_same_circuit(tmp_path: Path, basis: str) -> None:
    qubits, pairs = identity_csv(5)  # a d=5 chip's table used at d=3 and d=5
    path = write_target(tmp_path, 'qubit_table = "q.csv"\npair_table = "p.csv"', {"q.csv": qubits, "p.csv": pairs})
    plain = circuit_of(EXAMPLE_TOML, distance=3, basis=basis)
    assert NoiseModel.from_target(load_target(path)).qubits  # the table is there...
    assert str(circuit_of(path, distance=3, basis=basis)) == str(plain)  # ...and changes nothing
    assert str(circuit_of(path, distance=5, basis=basis)) == str(circuit_of(EXAMPLE_TOML, distance=5, basis=basis))


def readout_flips(circuit: stim.Circuit) -> dict[int, list[float]]:
    """qubit -> the flip probability placed right before each of its measurements (0 for none)."""
    ops = list(circuit.flattened())
    out: dict[int, list[float]] = {}
    for k, inst in enumerate(ops):
        if inst.name not in ("M", "MR", "MX", "MRX"):
            continue
        placed: dict[int, float] = {}
        j = k - 1
        while j >= 0 and ops[j].name in ("X_ERROR", "Z_ERROR"):
            placed.update({t.value: ops[j].gate_args_copy()[0] for t in ops[j].targets_copy()})
            j -= 1
        for t in inst.targets_copy():
            out.setdefault(t.value, []).append(placed.get(t.value, 0.0))
    return out


def test_a_bad_qubit_readout_is_placed_at_exactly_its_measurements() -> None:
    text = with_tables('[device.qubits]\n"2,2" = { readout = 0.04 }')  # a measure qubit of d=3
    index = qubit_layout(code="surface", distance=3).by_coords[(2.0, 2.0)].index
    flips, plain = readout_flips(circuit_of(text)), readout_flips(circuit_of(EXAMPLE_TOML))
    assert flips.pop(index) == [0.04] * 3  # three rounds: three readouts of that qubit at 0.04
    assert plain.pop(index) == [0.01] * 3
    assert flips == plain  # every other readout as before
    assert {p for ps in flips.values() for p in ps} == {0.01}
    # nothing else moved: the 2q, 1q, reset and idle channels are the component values'
    def others(c: stim.Circuit) -> list[str]:
        return [str(i) for i in c.flattened() if i.name != "X_ERROR"]
    assert others(circuit_of(text)) == others(circuit_of(EXAMPLE_TOML))


def test_scale_factors_multiply_each_qubits_own_value() -> None:
    t = parse_target(with_tables('[device.qubits]\n"2,2" = { readout = 0.04, t1_us = 20.0, t2_us = 10.0 }'))
    model = NoiseModel.from_target(t).with_scales({"readout": 0.5, "idle": 0.0})
    assert model.probability("readout", at=(2.0, 2.0)) == 0.02
    assert model.probability("readout", at=(1.0, 1.0)) == model.probability("readout") == 0.005
    twirl, excess = model.idle_channel(duration_ns=40, during_measure=False, at=(2.0, 2.0))
    assert twirl.total == 0 and excess == 0
    slow = NoiseModel.from_target(t).idle_channel(duration_ns=40, during_measure=True, at=(2.0, 2.0))[0]
    today = NoiseModel.from_target(t).idle_channel(duration_ns=40, during_measure=True)[0]
    assert slow.total > today.total  # its own T1/T2 (20/10 us) decay faster than the chip's 50/40


def test_a_bad_pair_gets_its_own_two_qubit_error() -> None:
    text = with_tables('[device.pairs]\n"3,3-2,2" = { gate_2q_infidelity = 0.016 }')
    c = str(circuit_of(text))
    # r = p * D / (D + 1), D = 4 (Nielsen, Phys. Lett. A 303, 249 (2002)): p = 1.25 r = 0.02
    assert "DEPOLARIZE2(0.02)" in c
    lay = qubit_layout(code="surface", distance=3)
    a, b = lay.by_coords[(2.0, 2.0)].index, lay.by_coords[(3.0, 3.0)].index
    bad = [i for i in circuit_of(text).flattened() if i.name == "DEPOLARIZE2" and i.gate_args_copy() == [0.02]]
    assert {frozenset(t.value for t in i.targets_copy()) for i in bad} == {frozenset((a, b))}


# ---------------------------------------------------------------------------------------------
# reading


def test_csv_and_inline_tables_agree(tmp_path: Path) -> None:
    inline = ('[device.qubits]\n"3,3" = { readout = 0.04, gate_1q_infidelity = 2e-3 }\n'
              '"0,4" = { t1_us = 30.0 }\n[device.pairs]\n"2,2-3,3" = { gate_2q = 0.02 }')
    csv_path = write_target(tmp_path, 'qubit_table = "q.csv"\npair_table = "p.csv"', {
        "q.csv": "x,y,readout,gate_1q_infidelity,t1_us\n3,3,0.04,2e-3,\n0,4,,,30\n",
        "p.csv": "x1,y1,x2,y2,gate_2q\n3,3,2,2,0.02\n"})
    a, b = parse_target(with_tables(inline)), load_target(csv_path)
    assert a.device.qubits == b.device.qubits and a.device.pairs == b.device.pairs
    assert NoiseModel.from_target(a).qubit_value("gate_1q", (3.0, 3.0)) == pytest.approx(3e-3)  # 3r/2 (Nielsen, as above)
    assert str(circuit_of(with_tables(inline))) == str(circuit_of(csv_path))
    # the samples' identity covers the table's contents, not only its file name
    plain = parse_target(EXAMPLE_TOML).sampling_sha256
    assert plain not in (a.sampling_sha256, b.sampling_sha256)
    (tmp_path / "p.csv").write_text("x1,y1,x2,y2,gate_2q\n3,3,2,2,0.03\n")
    assert load_target(csv_path).sampling_sha256 != b.sampling_sha256


def test_inline_values_override_the_csv_table_field_by_field(tmp_path: Path) -> None:
    path = write_target(tmp_path, 'qubit_table = "q.csv"\n[device.qubits]\n"3,3" = { readout = 0.05 }',
                        {"q.csv": "x,y,readout,reset\n3,3,0.04,0.01\n"})
    values = load_target(path).device.qubits["3,3"]
    assert (values.readout, values.reset) == (0.05, 0.01)


def test_a_table_without_changes_keeps_the_sampling_hash() -> None:
    # out directories sampled before tables existed stay resumable
    assert "qubits" not in parse_target(EXAMPLE_TOML).model_dump(include={"device"})["device"]


BAD_TABLES = {
    "unknown coordinate": ("x,y,readout\n3,4,0.04\n", "q.csv: 3,4 (or"),
    "bad number": ("x,y,readout\n3,3,abc\n", "row 2 (3,3): readout: 'abc' is not a number"),
    "non-finite": ("x,y,readout\n3,3,nan\n", "readout: nan is not a finite number"),
    "too large": ("x,y,readout\n3,3,0.7\n", "readout: 0.7 is too large"),
    "missing column": ("x,readout\n3,0.04\n", "missing column 'y'"),
    "unknown column": ("x,y,readuot\n3,3,0.04\n", "did you mean 'readout'"),
    "T2 > 2 T1": ("x,y,t1_us,t2_us\n3,3,10,30\n", "T2 <= 2*T1"),
    "T2 > 2 T1 against the component T1": ("x,y,t2_us\n3,3,120\n", "T2 <= 2*T1"),
    "short row": ("x,y,readout\n3,3\n", "row 2: 3 cells expected"),
    "same qubit twice": ("x,y,readout\n3,3,0.01\n3.0,3,0.02\n", "the same qubit as an earlier row"),
    "empty file": ("", "empty"),
    "comments only": ("# invented\n\n", "empty"),
    "bad number after comments": ("# invented\nx,y,readout\n# a comment\n3,3,0.01\n1,1,abc\n",
                                  "row 5 (1,1): readout: 'abc'"),
}


@pytest.mark.parametrize("case", list(BAD_TABLES))
def test_a_bad_table_is_one_line_and_exit_2(tmp_path: Path, case: str) -> None:
    table, needle = BAD_TABLES[case]
    path = write_target(tmp_path, 'qubit_table = "q.csv"', {"q.csv": table})
    result = runner.invoke(app, ["circuit", str(path), "--distance", "3"])
    assert result.exit_code == 2, (result.stdout[-300:], result.stderr)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr, result.stderr
    assert needle in lines[0], lines[0]
    assert "q.csv" in lines[0] or "chip.toml" in lines[0], lines[0]


BAD_INLINE = {
    "unknown coordinate": ('[device.qubits]\n"9,2" = { readout = 0.04 }', 'device.qubits."9,2": no qubit of the surface code'),
    "not a coordinate": ('[device.qubits]\n"3;3" = { readout = 0.04 }', "is not 'x,y'"),
    "no pair": ('[device.pairs]\n"1,1-3,3" = { gate_2q = 0.02 }', 'device.pairs."1,1-3,3": these qubits share no'),
    "unknown field": ('[device.qubits]\n"3,3" = { readuot = 0.04 }', "did you mean 'readout'"),
    "quoted number": ('[device.qubits]\n"3,3" = { readout = "0.04" }', "is not a number"),
    "T2 > 2 T1": ('[device.qubits]\n"3,3" = { t1_us = 10.0, t2_us = 30.0 }', 'device.qubits."3,3".t2_us'),
    "both gate keys": ('[device.qubits]\n"3,3" = { gate_1q = 0.001, gate_1q_infidelity = 0.001 }', "not both"),
}


@pytest.mark.parametrize("case", list(BAD_INLINE))
def test_a_bad_inline_table_is_one_line_and_exit_2(tmp_path: Path, case: str) -> None:
    extra, needle = BAD_INLINE[case]
    path = tmp_path / "chip.toml"
    path.write_text(with_tables(extra))
    for command in ("circuit", "layout"):
        result = runner.invoke(app, [command, str(path), "--distance", "3"])
        assert result.exit_code == 2, (result.stdout[-300:], result.stderr)
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1 and needle in lines[0] and "chip.toml" in lines[0], result.stderr


def test_a_preset_takes_no_table() -> None:
    text = ('[device]\nname = "p"\n[device.preset]\nmodel = "sd6"\np = 0.001\n'
            '[device.qubits]\n"3,3" = { readout = 0.04 }\n[goal]\nlogical_error_per_cycle = 1e-6\n'
            '[sweep]\ndistances = [3]\n')
    with pytest.raises(ValueError, match="not used with device.preset"):
        parse_target(text, source="p.toml")


# ---------------------------------------------------------------------------------------------
# layout


def test_the_d3_layout_is_stims_own() -> None:
    for basis in ("z", "x"):
        stims = stim.Circuit.generated(f"surface_code:rotated_memory_{basis}", distance=3, rounds=1)
        coords = {q: tuple(c) for q, c in stims.get_final_qubit_coordinates().items()}
        lay = qubit_layout(code="surface", distance=3)
        assert {q.index: q.coords for q in lay.qubits} == coords
    roles = [q.role for q in lay.qubits]
    # the rotated d=3 patch: 9 data qubits, 4 X and 4 Z stabilizers (common practice, no source)
    assert (roles.count("data"), roles.count("measure X"), roles.count("measure Z")) == (9, 4, 4)
    # every data qubit of d=3 sits on 1 to 4 stabilizers, the centre one on 4
    assert len(lay.by_coords[(3.0, 3.0)].neighbours) == 4
    assert all(1 <= len(q.neighbours) <= 4 for q in lay.qubits)
    assert len(lay.pairs) == 24  # 4 weight-4 and 4 weight-2 checks: 16 + 8 CNOTs per round


def test_layouts_nest() -> None:
    small, large = qubit_layout(code="surface", distance=3), qubit_layout(code="surface", distance=5)
    assert set(small.by_coords) <= set(large.by_coords) and set(small.pairs) <= set(large.pairs)


def test_layout_command_shows_each_qubits_values(tmp_path: Path) -> None:
    path = tmp_path / "chip.toml"
    path.write_text(with_tables('[device.qubits]\n"2,2" = { readout = 0.04 }'))
    result = runner.invoke(app, ["layout", str(path), "--distance", "3", "--json"])
    assert result.exit_code == 0, result.stderr
    import json

    doc = json.loads(result.stdout)
    rows = {r["key"]: r for r in doc["qubits"]}
    assert len(rows) == 17 and rows["2,2"]["readout"] == 0.04 and rows["2,2"]["own"]
    assert rows["3,3"]["readout"] == 0.01 and not rows["3,3"]["own"]
    assert rows["3,3"]["role"] == "data" and sorted(rows["3,3"]["gate_2q"]) == rows["3,3"]["neighbours"]
    table = runner.invoke(app, ["layout", str(path), "--distance", "3", "--csv"])
    assert table.exit_code == 0, table.stderr
    # the CSV is a qubit table: pasted back, it gives the same circuit
    (tmp_path / "q.csv").write_text(table.stdout)
    back = write_target(tmp_path, 'qubit_table = "q.csv"')
    assert str(circuit_of(back)) == str(circuit_of(path))
    text = runner.invoke(app, ["layout", str(path), "--distance", "3"])
    assert text.exit_code == 0 and "measure X" in text.stdout and "2,2" in text.stdout


def test_layout_rows_of_the_repetition_code() -> None:
    rows = layout_rows(NoiseModel.sd6(0.001), code="repetition", distance=3)
    assert [r["key"] for r in rows] == ["0,0", "1,0", "2,0", "3,0", "4,0"]
    assert [r["role"] for r in rows] == ["data", "measure Z", "data", "measure Z", "data"]


def test_the_example_table_pasted_back_from_layout_gives_the_same_circuit(tmp_path: Path) -> None:
    example = Path(__file__).resolve().parents[1] / "examples" / "qubits_demo.toml"
    result = runner.invoke(app, ["layout", str(example), "--distance", "7", "--csv"])
    assert result.exit_code == 0, result.stderr
    (tmp_path / "pasted.csv").write_text(result.stdout)
    copy = tmp_path / "copy.toml"
    copy.write_text(example.read_text().replace('"qubits_demo.csv"', '"pasted.csv"'))
    original = NoiseModel.from_target(load_target(example))
    assert len(original.qubits) == 97 and len(original.pairs) == 1
    pasted = NoiseModel.from_target(load_target(copy))
    for d in (3, 5):
        a = build_memory_circuit(original, code="surface", distance=d, rounds=2, basis="x")
        b = build_memory_circuit(pasted, code="surface", distance=d, rounds=2, basis="x")
        assert str(a) == str(b)


@pytest.mark.slow
def test_an_out_directory_keeps_the_tables_its_target_names(tmp_path: Path) -> None:
    from planner.jobs.review import load_out_dir
    from planner.sampling import run_sweep
    from planner.store import SampleStore
    from planner.sweep import StoppingRule, plan_sweep

    src = tmp_path / "src"
    src.mkdir()
    (src / "q.csv").write_text("x,y,readout\n1,0,0.04\n")
    text = EXAMPLE_TOML.replace('native_2q = "cz"\n', 'native_2q = "cz"\nqubit_table = "q.csv"\n').replace(
        "distances = [3, 5]", 'code = "repetition"\nbases = ["z"]\ndistances = [3, 5]')
    (src / "rep.toml").write_text(text)
    spec = load_target(src / "rep.toml")
    out = tmp_path / "out"
    run_sweep(plan_sweep(spec).tasks, store=SampleStore(out), rule=StoppingRule(max_errors=20, max_shots=2_000),
              workers=1, target=spec)
    assert (out / "q.csv").read_bytes() == (src / "q.csv").read_bytes()
    copy = load_out_dir(out).target  # the target copy reads the same table
    assert copy.device.qubits == spec.device.qubits and copy.sampling_sha256 == spec.sampling_sha256
