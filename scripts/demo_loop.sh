#!/usr/bin/env bash
# The calibration loop on the invented scenario: measured data -> calibrated model -> planning.
#
# 1. `planner events` plays the experiment: 200,000 shots of a d=5, 5-round Z memory sampled
#    from targets/hidden_device.toml (the demo chip with hidden excess errors; invented numbers)
#    and one bad qubit at 3,3 (its [device.qubits] entry).
# 2. `planner calibrate targets/demo.toml` (the first-principles budget) fits the excess back,
#    names the bad qubit, samples the staged comparison and writes calibrated.toml.
# 3. `planner run` answers the planning questions on the calibrated target, with the demo's
#    sweep cut to d = 3, 5 and two joint scale points so the loop stays short.
#
# Everything goes under out/demo-loop/. Usage: bash scripts/demo_loop.sh [PLANNER]
set -euo pipefail
# examples/demo_logical.csv: invented measured logical failures (per distance and one sub-patch,
# the last one too good to be true) that calibrate checks against the calibrated model.
cd "$(dirname "$0")/.."
PLANNER=${1:-.venv/bin/planner}
OUT=out/demo-loop
mkdir -p "$OUT"
say() { printf '\n== %s\n' "$*" >&2; }

say "1/3 the hidden device plays the experiment (invented data)"
"$PLANNER" events targets/hidden_device.toml --distance 5 --rounds 5 --basis z --shots 200000 \
    --out "$OUT/events.b8" --format b8 --seed 2026

say "2/3 calibrate the first-principles model (targets/demo.toml) against it"
"$PLANNER" calibrate targets/demo.toml --events "$OUT/events.b8" --distance 5 --rounds 5 --basis z \
    --format b8 --logical examples/demo_logical.csv --out "$OUT/calibrate"

say "3/3 planning answers on the calibrated target (sweep cut for the demo)"
python3 - "$OUT/calibrate/calibrated.toml" "$OUT/calibrated_small.toml" <<'PY'
import re, sys
text = open(sys.argv[1]).read()
text = re.sub(r"(?m)^distances = .*$", "distances = [3, 5]", text)
text = re.sub(r"(?m)^joint_scales = .*$", "joint_scales = [0.7, 1.0]", text)
text = re.sub(r"(?m)^component_scales = .*$", "component_scales = []", text)
open(sys.argv[2], "w").write("# calibrated.toml with the demo's sweep cut to d = 3, 5 (demo_loop.sh)\n" + text)
PY
"$PLANNER" run "$OUT/calibrated_small.toml" --budget quick --out "$OUT/run"
