#!/usr/bin/env bash
# Times cornerflow and general-purpose sparse direct solvers on the identical matrix in one run:
# installs the peers from PyPI into a virtual environment on first use (SciPy's SuperLU,
# PARDISO through pypardiso, MUMPS through the python-mumps 0.0.2 wheel, which needs NumPy 1;
# a peer that does not install is skipped by peers.py), builds the release binary, runs the
# default case (examples/profile-channel.toml) with every mesh size divided by SCALE (unknowns
# grow about like SCALE²) and --export-system, then hands the exported matrix to
# benches/peers.py in that environment.
#
# The environment lives in CORNERFLOW_PEERS_VENV (default target/peers-venv); delete it to
# reinstall.
#
# Usage: benches/peers.sh [SCALE] [WORKDIR] [peers.py options...]
#   SCALE    divides [mesh] size, part_sizes and grading h_min of the case (default 1)
#   WORKDIR  where the case, the run output and the system go (default target/peers/scale-SCALE)
# Example: benches/peers.sh 2 /tmp/peers --repeat 3 --threads 1
set -euo pipefail

root=$(cd "$(dirname "$0")/.." && pwd)
scale=${1:-1}
work=${2:-$root/target/peers/scale-$scale}
shift $(( $# < 2 ? $# : 2 ))

cargo build --release --quiet --manifest-path "$root/Cargo.toml" --bin cornerflow
bin=${CARGO_TARGET_DIR:-$root/target}/release/cornerflow

mkdir -p "$work"
case_file="$work/profile-channel.toml"
python3 - "$root/examples/profile-channel.toml" "$case_file" "$scale" <<'PY'
import re, sys
source, target, scale = sys.argv[1], sys.argv[2], float(sys.argv[3])
if not scale > 0:
    sys.exit(f"SCALE must be positive, got {sys.argv[3]}")
text = open(source, encoding="utf-8").read()
def shrink(match):
    return f"{match.group(1)}{float(match.group(2)) / scale:.6g}"
# The three mesh lengths of the case: global size, the wing's part size, grading h_min.
for key in (r"(\nsize = )([0-9.eE+-]+)", r"(wing = )([0-9.eE+-]+)", r"(\nh_min = )([0-9.eE+-]+)"):
    text, count = re.subn(key, shrink, text)
    if count != 1:
        sys.exit(f"could not find {key!r} in {source}")
open(target, "w", encoding="utf-8").write(text)
PY

venv=${CORNERFLOW_PEERS_VENV:-$root/target/peers-venv}
if [ ! -x "$venv/bin/python" ]; then
  python3 -m venv "$venv"
  "$venv/bin/pip" install --quiet "numpy<2" "scipy<1.14" pypardiso \
    || echo "peers.sh: SciPy or pypardiso did not install; their rows will be skipped" >&2
  "$venv/bin/pip" install --quiet "python-mumps==0.0.2" \
    || echo "peers.sh: python-mumps did not install; the MUMPS rows will be skipped" >&2
fi

"$bin" run "$case_file" -o "$work/run" --force --export-system "$work/system"
"$venv/bin/python" "$root/benches/peers.py" "$work/system" "$@"
