#!/usr/bin/env bash
# Steady Navier–Stokes (DFG cylinder 2D-1, Re = 20; examples/cylinder-benchmark.toml) with each
# solver of the Newton systems, at several mesh sizes: builds the release binary, runs
# `cornerflow run --newton-solver S` for S in reuse-lu and lu with [mesh] size and the
# cylinder's part size divided by SCALE, each under /usr/bin/time -v, and prints unknowns,
# Newton steps, GMRES iterations, numeric (factorisation) and solve seconds, the whole solve
# stage, peak RSS, c_D, and the fitted exponents p of time ~ unknowns^p per solver.
#
# Usage: benches/newton.sh [WORKDIR] [SCALE...]   (default target/newton; scales 1 2 4)
# CORNERFLOW_NEWTON_SOLVERS lists the solvers of the table (default "reuse-lu lu");
# CORNERFLOW_NEWTON_RUN those actually run (default: all of the table; "" to rerun none is
# not possible, give e.g. "reuse-lu" to rerun one and keep the other's earlier results).
# A benchmark, not a test; scale 4 (about 600k unknowns) takes minutes and ~6 GB with lu.
set -euo pipefail

root=$(cd "$(dirname "$0")/.." && pwd)
work=${1:-$root/target/newton}
shift $(( $# < 1 ? $# : 1 ))
scales=("$@")
[ ${#scales[@]} -gt 0 ] || scales=(1 2 4)
read -r -a solvers <<< "${CORNERFLOW_NEWTON_SOLVERS:-reuse-lu lu}"
run_solvers=("${solvers[@]}")
[ -z "${CORNERFLOW_NEWTON_RUN:-}" ] || read -r -a run_solvers <<< "$CORNERFLOW_NEWTON_RUN"

cargo build --release --quiet --manifest-path "$root/Cargo.toml" --bin cornerflow
bin=${CARGO_TARGET_DIR:-$root/target}/release/cornerflow
mkdir -p "$work"

for s in "${scales[@]}"; do
  python3 - "$root/examples/cylinder-benchmark.toml" "$work/case-$s.toml" "$s" <<'PY'
import re, sys
source, target, scale = sys.argv[1], sys.argv[2], float(sys.argv[3])
text = open(source, encoding="utf-8").read()
def shrink(m):
    return f"{m.group(1)}{float(m.group(2)) / scale:.6g}"
for key in (r"(\nsize = )([0-9.eE+-]+)", r"(cylinder = )([0-9.eE+-]+)"):
    text, count = re.subn(key, shrink, text)
    if count != 1:
        sys.exit(f"could not find {key!r} in {source}")
open(target, "w", encoding="utf-8").write(text)
PY
  for solver in "${run_solvers[@]}"; do
    dir="$work/scale-$s-$solver"
    mkdir -p "$dir"
    /usr/bin/time -v "$bin" run "$work/case-$s.toml" -o "$dir/run" --force \
      --newton-solver "$solver" > "$dir/stdout.txt" 2> "$dir/stderr.txt"
    echo "scale $s $solver done" >&2
  done
done

PYTHONPATH="$root/benches" python3 - "$work" "${solvers[*]}" "${scales[@]}" <<'PY'
import json, re, sys
from growth import fit
work, solvers, scales = sys.argv[1], sys.argv[2].split(), sys.argv[3:]
print("| solver | unknowns | Newton steps | GMRES iterations | numeric s | solve s | solve stage s | peak RSS GB | c_D (volume) |")
print("|---|---|---|---|---|---|---|---|---|")
series = {}
for solver in solvers:
    for s in scales:
        d = f"{work}/scale-{s}-{solver}"
        summary = json.load(open(f"{d}/run/summary.json"))
        err = open(f"{d}/stderr.txt").read()
        rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", err).group(1)) * 1024
        sol = summary["solver"]
        n = sol["velocity_dofs"] + sol["pressure_dofs"]
        its = [i.get("linear_iterations", 0) for i in sol["iterations"]]
        t = sol["timings_s"]
        stage = summary["stage_timings_s"]["solve"]
        cd = summary["forces"][0]["volume"]["coefficients"]["drag"]
        series.setdefault(solver, []).append((n, t["numeric"], stage))
        print(f"| {solver} | {n:,} | {len(its)} | {'+'.join(map(str, its))} | {t['numeric']:.2f} | "
              f"{t['solve']:.2f} | {stage:.2f} | {rss / 1e9:.2f} | {cd:.6f} |")
for solver, rows in series.items():
    ns = [r[0] for r in rows]
    print(f"| {solver}: exponent p | | | | {fit(ns, [r[1] for r in rows]):.2f} | | "
          f"{fit(ns, [r[2] for r in rows]):.2f} | | |")
PY
