"""Helpers of scripts/cluster_check.sh (``make cluster-check``); standard library and sinter only.

``driver README OUT --interface IF --port P --venv DIR --partition Q --account A --memory M``
    Takes the dask-jobqueue driver script exactly as README.md's "Slurm with dask-jobqueue"
    section shows it and writes it to OUT with only the site values replaced (partition, account,
    cores/processes/memory/walltime per job, interface, port, the venv to activate, the number of
    jobs). Fails if the README's recipe has a parameter this check does not know, so the check
    and the README cannot drift apart silently.

``totals OUT_DIR STATUS_JSON``
    Checks the sweep in OUT_DIR: ``sinter.read_stats_from_csv_files`` over its shards against
    ``planner status --json`` (shots and errors per task), every manifest task present and meeting
    the quick budget. Prints one line per task and a summary; exit 1 on any mismatch.
"""

from __future__ import annotations

import argparse
import collections
import json
import re
import sys
from pathlib import Path

SECTION = "### Slurm with dask-jobqueue"
KWARG = re.compile(r"^(?P<indent>\s+)(?P<key>\w+)=(?P<value>.*?),(?P<comment>\s*#.*)?$")


def recipe(readme: str) -> str:
    """The first ```python block after the Slurm section's heading."""
    at = readme.find(SECTION)
    if at < 0:
        raise SystemExit(f"README.md: no section {SECTION!r}")
    m = re.search(r"```python\n(.*?)```", readme[at:], re.S)
    if m is None:
        raise SystemExit(f"README.md: no ```python block in {SECTION!r}")
    return m[1]


def adapt(code: str, site: dict[str, str], jobs: int) -> str:
    out, seen = [], set()
    for line in code.splitlines():
        m = KWARG.match(line)
        if m and "SLURMCluster" not in line:
            key = m["key"]
            if key not in site:
                raise SystemExit(f"README.md: the recipe passes {key}=..., which cluster_check does "
                                 f"not know how to set for a single-node check; known: {sorted(site)}")
            seen.add(key)
            line = f"{m['indent']}{key}={site[key]},{m['comment'] or ''}"
        elif re.search(r"cluster\.scale\(jobs=\d+\)", line):
            seen.add("scale")
            line = re.sub(r"cluster\.scale\(jobs=\d+\)", f"cluster.scale(jobs={jobs})", line)
        out.append(line)
    missing = {"interface", "scheduler_options", "job_script_prologue", "scale"} - seen
    if missing:
        raise SystemExit(f"README.md: the recipe no longer sets {sorted(missing)}; update "
                         "scripts/cluster_check_recipe.py together with the README")
    if "print(cluster.scheduler_address" not in code or "input(" not in code:
        raise SystemExit("README.md: the recipe must print cluster.scheduler_address and wait for Enter")
    return "\n".join(out) + "\n"


def driver(args: argparse.Namespace) -> None:
    site = {
        "queue": repr(args.partition),
        "account": repr(args.account),
        "cores": "1",  # one core per job, two jobs: the node's 2 CPUs ...
        "processes": "1",  # ... as single-threaded workers, as in the README
        "memory": repr(args.memory),
        "walltime": repr("00:30:00"),
        "interface": repr(args.interface),
        "scheduler_options": repr({"port": args.port, "interface": args.interface}),
        "job_script_prologue": repr([f"source {args.venv}/bin/activate"]),
    }
    text = adapt(recipe(Path(args.readme).read_text()), site, args.jobs)
    Path(args.out).write_text(text)
    print(text, end="")


def totals(args: argparse.Namespace) -> None:
    import sinter

    out = Path(args.out_dir)
    shards = sorted(str(p) for p in (out / "samples").glob("*.csv"))
    if not shards:
        raise SystemExit(f"{out}/samples: no shards written")
    by_id: dict[str, list[int]] = collections.defaultdict(lambda: [0, 0])
    for s in sinter.read_stats_from_csv_files(*shards):
        by_id[s.strong_id][0] += s.shots
        by_id[s.strong_id][1] += s.errors
    status = json.loads(Path(args.status_json).read_text())
    manifest = json.loads((out / "manifest.json").read_text())
    wanted = {t["strong_id"] for t in manifest["tasks"]}
    bad = []
    for row in status["tasks"]:
        sid = row["strong_id"]
        shots, errors = by_id.get(sid, [0, 0])
        ok = (shots, errors) == (row["shots"], row["errors"]) and (errors >= args.errors or
                                                                   shots >= args.shots)
        print(f"task {sid[:12]}  sinter shots={shots:>9,} errors={errors:>6,}  planner "
              f"shots={row['shots']:>9,} errors={row['errors']:>6,}  {'ok' if ok else 'MISMATCH'}")
        if not ok:
            bad.append(sid)
    listed = {row["strong_id"] for row in status["tasks"]}
    if listed != wanted or set(by_id) != wanted:
        bad.append(f"task sets differ: manifest {len(wanted)}, status {len(listed)}, shards {len(by_id)}")
    total_shots = sum(v[0] for v in by_id.values())
    total_errors = sum(v[1] for v in by_id.values())
    print(f"totals: {len(by_id)} tasks, {total_shots:,} shots, {total_errors:,} errors in "
          f"{len(shards)} shard(s); sinter and planner agree: {'yes' if not bad else 'NO'}")
    if bad:
        print("mismatch:", *bad, file=sys.stderr)
        raise SystemExit(1)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = parser.add_subparsers(dest="cmd", required=True)
    d = sub.add_parser("driver")
    d.add_argument("readme")
    d.add_argument("out")
    for opt in ("--interface", "--venv", "--partition", "--account", "--memory"):
        d.add_argument(opt, required=True)
    d.add_argument("--port", type=int, required=True)
    d.add_argument("--jobs", type=int, default=2)
    t = sub.add_parser("totals")
    t.add_argument("out_dir")
    t.add_argument("status_json")
    t.add_argument("--errors", type=int, default=1_000, help="the budget's error count")
    t.add_argument("--shots", type=int, default=1_000_000, help="the budget's shot count")
    args = parser.parse_args()
    {"driver": driver, "totals": totals}[args.cmd](args)


if __name__ == "__main__":
    main()
