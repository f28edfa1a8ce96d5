#!/usr/bin/env bash
# End-to-end scaling of steady Stokes on the default case (examples/profile-channel.toml):
# builds the release binary, runs `cornerflow run` once per SCALE with [mesh] size and the
# wing's part size divided by SCALE (unknowns grow about like SCALE²; grading h_min stays
# 0.003 unless the wing size is finer), each under /usr/bin/time -v, and prints one table row
# per run (unknowns; mesh, pattern, assembly, symbolic, numeric, solve, output and wall
# seconds; peak RSS) plus the fitted exponents p of time ~ unknowns^p (least squares in
# log-log over all rows).
#
# Usage: benches/scaling.sh [WORKDIR] [SCALE...]
#   WORKDIR  where cases and outputs go (default target/scaling)
#   SCALE    default: 1 2 4 6 8 11.5 (about 16k to 2.2M unknowns; the largest needs ~5 GB)
# Extra `cornerflow run` options go in CORNERFLOW_RUN_ARGS, e.g. "--ordering amd";
# CORNERFLOW_SCALING_REPORT_ONLY=1 only prints the table of runs already in WORKDIR.
# A benchmark, not a test: it takes minutes; never run it from `cargo test`.
set -euo pipefail

root=$(cd "$(dirname "$0")/.." && pwd)
work=${1:-$root/target/scaling}
shift $(( $# < 1 ? $# : 1 ))
scales=("$@")
[ ${#scales[@]} -gt 0 ] || scales=(1 2 4 6 8 11.5)

report_only=${CORNERFLOW_SCALING_REPORT_ONLY:-0}
if [ "$report_only" != 1 ]; then
  cargo build --release --quiet --manifest-path "$root/Cargo.toml" --bin cornerflow
fi
bin=${CARGO_TARGET_DIR:-$root/target}/release/cornerflow
mkdir -p "$work"

for s in "${scales[@]}"; do
  [ "$report_only" != 1 ] || continue
  dir="$work/scale-$s"
  mkdir -p "$dir"
  python3 - "$root/examples/profile-channel.toml" "$dir/case.toml" "$s" <<'PY'
import re, sys
source, target, scale = sys.argv[1], sys.argv[2], float(sys.argv[3])
if not scale > 0:
    sys.exit(f"SCALE must be positive, got {sys.argv[3]}")
text = open(source, encoding="utf-8").read()
size, wing = 0.15 / scale, 0.02 / scale
for key, value in ((r"\nsize = [0-9.eE+-]+", f"\nsize = {size:.6g}"),
                   (r"wing = [0-9.eE+-]+", f"wing = {wing:.6g}"),
                   (r"\nh_min = [0-9.eE+-]+", f"\nh_min = {min(0.003, wing):.6g}")):
    text, count = re.subn(key, value, text)
    if count != 1:
        sys.exit(f"could not find {key!r} in {source}")
open(target, "w", encoding="utf-8").write(text)
PY
  # shellcheck disable=SC2086
  /usr/bin/time -v "$bin" run "$dir/case.toml" -o "$dir/run" --force ${CORNERFLOW_RUN_ARGS:-} \
    > "$dir/stdout.txt" 2> "$dir/stderr.txt"
  echo "scale $s done" >&2
done

PYTHONPATH="$root/benches" python3 - "$work" "${scales[@]}" <<'PY'
import json, re, sys
from growth import fit
work, scales = sys.argv[1], sys.argv[2:]
cols = ["mesh", "pattern", "assembly", "symbolic", "numeric", "solve", "output", "wall"]
rows = []
for s in scales:
    d = f"{work}/scale-{s}"
    summary = json.load(open(f"{d}/run/summary.json"))
    err = open(f"{d}/stderr.txt").read()
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", err).group(1)) * 1024
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): ([0-9:.]+)", err).group(1)
    secs = sum(float(x) * 60 ** i for i, x in enumerate(reversed(wall.split(":"))))
    solver, stages = summary["solver"], summary["stage_timings_s"]
    t = solver["timings_s"]
    n = solver["velocity_dofs"] + solver["pressure_dofs"]
    rows.append((s, n, [stages["mesh"], t["pattern"], t["assembly"], t["symbolic"], t["numeric"],
                        t["solve"], stages["output"], secs], rss, solver.get("factor_entries")))
print("| scale | unknowns | " + " | ".join(f"{c} s" for c in cols) + " | peak RSS GB | nnz(L) |")
print("|" + "---|" * (len(cols) + 4))
for s, n, t, rss, l in rows:
    print(f"| {s} | {n:,} | " + " | ".join(f"{x:.2f}" for x in t) + f" | {rss / 1e9:.2f} | {l or '-'} |")
def exponent_row(label, selected):
    ns = [r[1] for r in selected]
    exps = [fit(ns, [r[2][k] for r in selected]) for k in range(len(cols))]
    print(f"| {label} | | " + " | ".join(f"{p:.2f}" for p in exps)
          + f" | {fit(ns, [r[3] for r in selected]):.2f} | {fit(ns, [r[4] or 0 for r in selected]):.2f} |")
exponent_row("exponent p (t ~ N^p), all rows", rows)
large = [r for r in rows if r[1] >= 250_000]
if len(large) >= 2:
    exponent_row("exponent p, N ≥ 250k", large)
PY
