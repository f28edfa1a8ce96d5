#!/usr/bin/env bash
# Alternating A/B timing of `cornerflow run` binaries on one case: this machine's speed drifts
# by tens of percent within minutes, so two builds are compared run by run, never series by
# series. Prints one line per run (binary, wall s, user s, system s, peak RSS KB) and, per
# binary, the medians and the paired wall-time differences against the first binary.
#
# Usage: benches/alternate.sh PAIRS CASE.toml BINARY... (e.g. a copy of an older build's
#   target/release/cornerflow and the current one). Each run writes into a temporary folder.
# A benchmark, not a test: never run it from `cargo test`.
set -euo pipefail
[ $# -ge 3 ] || { echo "usage: $0 PAIRS CASE.toml BINARY..." >&2; exit 2; }
pairs=$1 case=$2
shift 2
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT
for _ in $(seq "$pairs"); do
  for bin in "$@"; do
    /usr/bin/time -f "%e %U %S %M" -o "$out/time" "$bin" run "$case" -o "$out/run" --force \
      > /dev/null 2>&1
    echo "$bin $(cat "$out/time")"
  done
done | python3 -c '
import statistics, sys
runs = {}
for line in sys.stdin:
    print(line.rstrip(), flush=True)
    bin, wall, user, system, peak = line.split()
    runs.setdefault(bin, []).append((float(wall), float(user), float(system), int(peak)))
first = next(iter(runs.values()))
for bin, r in runs.items():
    med = [statistics.median(x[k] for x in r) for k in range(3)]
    diff = statistics.median(b[0] - a[0] for a, b in zip(first, r))
    print(f"{bin}: median wall {med[0]:.2f} s, user {med[1]:.2f} s, system {med[2]:.2f} s, "
          f"peak {max(x[3] for x in r) / 1e6:.2f} GB; median paired difference {diff:+.2f} s")
'
