#!/usr/bin/env python3
"""Times general-purpose sparse direct solvers on a system exported by cornerflow.

Reads ``DIR/matrix.mtx``, ``DIR/rhs.mtx`` and ``DIR/info.json`` written by
``cornerflow run CASE --export-system DIR`` and factorises and solves the identical matrix with
each available peer, every peer in its own child process (so that one solver's memory or a
hang cannot disturb the next; each child has a time limit). For every peer it reports the
median over ``--repeat`` fresh factorisations of: analysis, numeric factorisation and one
solve (wall-clock seconds), the relative residual ``||b - A x||_2 / ||b||_2`` of the delivered
solution, the factor size where the solver reports it, the peak resident memory of the child,
and the ratio of the peer's analysis+factorisation+solve time to cornerflow's own
(symbolic + numeric + refined solve, from ``info.json``): a ratio above 1 means the peer was
slower on this matrix.

Peers (each skipped with a note when its package is missing):

* ``superlu-colamd``: ``scipy.sparse.linalg.splu`` with ``permc_spec="COLAMD"`` (SuperLU's
  default; its analysis is inside its factorisation time).
* ``superlu-mmd-sym``: ``splu`` with ``permc_spec="MMD_AT_PLUS_A"``, ``diag_pivot_thresh=0.01``
  and ``SymmetricMode=True`` -- SuperLU's setting for structurally symmetric matrices. The
  minimum-degree ordering on ``A + A^T`` with the default pivot threshold (1.0) is available as
  ``superlu-mmd-default`` but not run by default: on a 160k-unknown Stokes matrix it did not
  finish in 300 s (``refs/solver-peers.md``).
* ``pardiso-nonsym`` (matrix type 11, real nonsymmetric) and ``pardiso-sym`` (type -2, real
  symmetric indefinite, upper triangle) through ``pypardiso``: the phases 11 (analysis), 22
  (factorisation) and 33 (solve, with PARDISO's default iterative refinement) are timed
  separately.
* ``mumps-unsym`` (``sym = 0``) and ``mumps-sym`` (``sym = 2``, general symmetric, upper
  triangle) through the ``mumps`` module of the ``python-mumps`` bindings, with MUMPS's
  automatic choice of ordering; analysis, factorisation and solve timed separately.

Install: ``benches/peers.sh`` installs the peers into a virtual environment on first use
(this script itself installs nothing). By hand::

    python3 -m venv target/peers-venv
    target/peers-venv/bin/pip install "numpy<2" "scipy<1.14" pypardiso python-mumps==0.0.2

The only ``python-mumps`` release with a binary wheel for CPython 3.11 here is 0.0.2 (MUMPS
5.2.1, sequential, with METIS, SCOTCH and OpenBLAS inside the wheel), built against NumPy 1,
hence the pins (measured 2026-12-04; newer releases have no wheel and need a MUMPS library
from the system).

python-mumps is BSD-2-Clause (its wheel's metadata); MUMPS itself is CeCILL-C, a free LGPL-like
licence (from memory: the wheel does not state it); like the others, a benchmark-only peer. Licences (from the installed packages' metadata, 2026-12-03): scipy 1.17.1 is BSD-3-Clause
(its wheel bundles OpenBLAS, BSD-3-Clause, and the GCC runtime libraries); pypardiso 0.4.7
is BSD-3-Clause; pypardiso pulls in Intel's ``mkl`` 2026.2.1 and ``tbb`` wheels under the
Intel Simplified Software License and ``intel-openmp`` under Intel's End User License
Agreement for Developer Tools -- free to use, proprietary, not permissive open-source
licences. That is acceptable only because these are benchmark-only peers: cornerflow does
not depend on any of them, and neither its code nor its tests import them.

Run::

    python3 benches/peers.py DIR [--repeat 3] [--threads 1] [--solvers a,b,...] [--timeout 600]

or ``benches/peers.sh``, which exports the system and runs this script in one go. The results
are printed as a Markdown table and written to ``DIR/peers.json``.

Threads: ``--threads`` sets ``OMP_NUM_THREADS``, ``MKL_NUM_THREADS`` and
``OPENBLAS_NUM_THREADS`` in each child (default 1). cornerflow factorises the two halves of
its nested dissection on two threads when each has at least 500 unknowns, so compare with
``--threads 2``.
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import time

DEFAULT_SOLVERS = [
    "superlu-colamd",
    "superlu-mmd-sym",
    "pardiso-nonsym",
    "pardiso-sym",
    "mumps-unsym",
    "mumps-sym",
]
ALL_SOLVERS = DEFAULT_SOLVERS + ["superlu-mmd-default"]


class Skip(Exception):
    """A peer that cannot run here (package missing); the message says why."""


def peak_rss_gb():
    import resource

    # ru_maxrss is in kilobytes on Linux.
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6


def load_system(directory):
    """Returns (A as CSC float64, b as 1-d array) read with scipy.io.mmread."""
    import numpy as np
    import scipy.io
    import scipy.sparse as sp

    a = sp.csc_matrix(scipy.io.mmread(os.path.join(directory, "matrix.mtx")), dtype=np.float64)
    b = np.asarray(scipy.io.mmread(os.path.join(directory, "rhs.mtx")), dtype=np.float64).ravel()
    if a.shape[0] != a.shape[1] or a.shape[0] != b.shape[0]:
        raise ValueError(f"matrix {a.shape} and right-hand side {b.shape} do not match")
    return a, b


def relative_residual(a, x, b):
    import numpy as np

    return float(np.linalg.norm(b - a @ x) / np.linalg.norm(b))


def run_superlu(a, b, variant):
    try:
        from scipy.sparse.linalg import splu
    except ImportError as e:
        raise Skip(f"scipy missing: {e}")
    options = {
        "superlu-colamd": {"permc_spec": "COLAMD"},
        "superlu-mmd-sym": {
            "permc_spec": "MMD_AT_PLUS_A",
            "diag_pivot_thresh": 0.01,
            "options": {"SymmetricMode": True},
        },
        "superlu-mmd-default": {"permc_spec": "MMD_AT_PLUS_A"},
    }[variant]
    start = time.perf_counter()
    lu = splu(a, **options)
    factored = time.perf_counter()
    x = lu.solve(b)
    solved = time.perf_counter()
    return {
        "analyse_s": None,
        "factor_s": factored - start,
        "solve_s": solved - factored,
        "relative_residual": relative_residual(a, x, b),
        "factor_entries": int(lu.L.nnz + lu.U.nnz),
    }


def run_pardiso(a, b, symmetric):
    try:
        import numpy as np
        import scipy.sparse as sp
        from pypardiso import PyPardisoSolver
    except ImportError as e:
        raise Skip(f"pypardiso missing: {e}")
    solver = PyPardisoSolver(mtype=-2 if symmetric else 11)
    # PARDISO reads CSR; the symmetric types read the upper triangle only.
    m = sp.triu(a, format="csr") if symmetric else a.tocsr()
    m.sort_indices()
    solver.set_iparm(1, 0)  # 0: PARDISO's own defaults for every iparm (pardisoinit).
    rhs = np.asfortranarray(b.reshape(-1, 1))
    times = []
    for phase in (11, 22, 33):
        solver.set_phase(phase)
        start = time.perf_counter()
        x = solver._call_pardiso(m, rhs)
        times.append(time.perf_counter() - start)
    factor_entries = int(solver.get_iparm(18))  # iparm(18): nonzeros in the factors.
    solver.free_memory(everything=True)
    x = np.ravel(x)
    return {
        "analyse_s": times[0],
        "factor_s": times[1],
        "solve_s": times[2],
        "relative_residual": relative_residual(a, x, b),
        "factor_entries": factor_entries,
    }


def run_mumps(a, b, symmetric):
    try:
        import mumps  # python-mumps bindings
    except ImportError as e:
        raise Skip(f"mumps bindings missing: {e}")
    import scipy.sparse as sp

    try:
        ctx = mumps.Context()
        m = sp.triu(a, format="coo") if symmetric else a.tocoo()
        ctx.set_matrix(m, symmetric=symmetric)
        start = time.perf_counter()
        ctx.analyze()
        analysed = time.perf_counter()
        ctx.factor()
        factored = time.perf_counter()
        x = ctx.solve(b)
        solved = time.perf_counter()
    except (AttributeError, TypeError) as e:
        raise Skip(f"unsupported mumps bindings API: {e}")
    return {
        "analyse_s": analysed - start,
        "factor_s": factored - analysed,
        "solve_s": solved - factored,
        "relative_residual": relative_residual(a, x.ravel(), b),
        "factor_entries": None,
    }


def run_one(solver, a, b):
    if solver.startswith("superlu"):
        return run_superlu(a, b, solver)
    if solver.startswith("pardiso"):
        return run_pardiso(a, b, symmetric=solver == "pardiso-sym")
    if solver.startswith("mumps"):
        return run_mumps(a, b, symmetric=solver == "mumps-sym")
    raise ValueError(f"unknown solver {solver}")


def worker(solver, directory, repeat):
    """Child process: loads the system, runs `solver` `repeat` times, prints one JSON line."""
    try:
        a, b = load_system(directory)
    except ImportError as e:
        print(json.dumps({"skipped": f"scipy missing: {e}"}))
        return
    loaded_rss = peak_rss_gb()
    runs = []
    try:
        for _ in range(repeat):
            runs.append(run_one(solver, a, b))
    except Skip as e:
        print(json.dumps({"skipped": str(e)}))
        return
    print(json.dumps({"runs": runs, "peak_rss_gb": peak_rss_gb(), "rss_after_load_gb": loaded_rss}))


def median(values):
    values = [v for v in values if v is not None]
    return statistics.median(values) if values else None


def summarise(solver, result, ours_total):
    runs = result["runs"]
    row = {"solver": solver, "repetitions": len(runs)}
    for key in ("analyse_s", "factor_s", "solve_s"):
        row[key] = median([r[key] for r in runs])
    row["total_s"] = median(
        [(r["analyse_s"] or 0.0) + r["factor_s"] + r["solve_s"] for r in runs]
    )
    row["relative_residual"] = max(r["relative_residual"] for r in runs)
    row["factor_entries"] = runs[0]["factor_entries"]
    row["peak_rss_gb"] = result["peak_rss_gb"]
    row["ratio_to_cornerflow"] = row["total_s"] / ours_total if ours_total else None
    return row


def fmt(value, spec):
    return "–" if value is None else format(value, spec)


def print_table(info, rows, skipped):
    ours = info["cornerflow"]
    t = ours["times_s"]
    print(
        f"\nsystem: n = {info['n']}, nnz = {info['nnz']} "
        f"({info['velocity_unknowns']} velocity + {info['pressure_unknowns']} pressure unknowns)"
    )
    print(
        "\n| solver | analyse s | factor s | solve s | total s | ratio to cornerflow "
        "| resid | factor nnz (M) | peak RSS GB |"
    )
    print("|---|---|---|---|---|---|---|---|---|")
    entries = ours.get("factor_entries")
    print(
        f"| cornerflow ({ours['solver']}) | {t['symbolic']:.3f} | {t['numeric']:.3f} "
        f"| {t['solve']:.3f} | {t['factor_and_solve']:.3f} | 1 "
        f"| {ours['relative_residual']:.1e} | {fmt(entries and entries / 1e6, '.1f')} | – |"
    )
    for r in rows:
        print(
            f"| {r['solver']} | {fmt(r['analyse_s'], '.3f')} | {fmt(r['factor_s'], '.3f')} "
            f"| {fmt(r['solve_s'], '.3f')} | {fmt(r['total_s'], '.3f')} "
            f"| {fmt(r['ratio_to_cornerflow'], '.2f')} | {r['relative_residual']:.1e} "
            f"| {fmt(r['factor_entries'] and r['factor_entries'] / 1e6, '.1f')} "
            f"| {fmt(r['peak_rss_gb'], '.2f')} |"
        )
    for solver, why in skipped:
        print(f"skipped {solver}: {why}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("directory", help="folder written by `cornerflow run --export-system`")
    parser.add_argument("--repeat", type=int, default=3, help="fresh factorisations per solver")
    parser.add_argument("--threads", type=int, default=1, help="BLAS / OpenMP threads")
    parser.add_argument(
        "--solvers",
        default=",".join(DEFAULT_SOLVERS),
        help=f"comma-separated subset of {', '.join(ALL_SOLVERS)}",
    )
    parser.add_argument("--timeout", type=float, default=600.0, help="seconds per solver")
    parser.add_argument("--worker", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.worker:
        worker(args.worker, args.directory, args.repeat)
        return 0

    with open(os.path.join(args.directory, "info.json"), encoding="utf-8") as f:
        info = json.load(f)
    ours_total = info["cornerflow"]["times_s"]["factor_and_solve"]
    env = dict(os.environ)
    for var in ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
        env[var] = str(args.threads)
    rows, skipped = [], []
    for solver in [s.strip() for s in args.solvers.split(",") if s.strip()]:
        if solver not in ALL_SOLVERS:
            parser.error(f"unknown solver {solver!r}; choose among {', '.join(ALL_SOLVERS)}")
        print(f"[peers] {solver} ...", file=sys.stderr, flush=True)
        command = [sys.executable, os.path.abspath(__file__), args.directory,
                   "--worker", solver, "--repeat", str(args.repeat)]
        try:
            done = subprocess.run(command, env=env, capture_output=True, text=True,
                                  timeout=args.timeout)
        except subprocess.TimeoutExpired:
            skipped.append((solver, f"did not finish within {args.timeout:.0f} s"))
            continue
        lines = done.stdout.strip().splitlines()
        if done.returncode != 0 or not lines:
            tail = done.stderr.strip().splitlines()[-1:] or [f"exit code {done.returncode}"]
            skipped.append((solver, f"failed: {tail[0]}"))
            continue
        result = json.loads(lines[-1])
        if "skipped" in result:
            skipped.append((solver, result["skipped"]))
            continue
        rows.append(summarise(solver, result, ours_total))
    print_table(info, rows, skipped)
    report = {
        "system": {k: info[k] for k in ("n", "nnz", "velocity_unknowns", "pressure_unknowns")},
        "cornerflow": info["cornerflow"],
        "threads": args.threads,
        "repetitions": args.repeat,
        "openblas_env": {k: os.environ.get(k) for k in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE")},
        "peers": rows,
        "skipped": [{"solver": s, "reason": r} for s, r in skipped],
    }
    out = os.path.join(args.directory, "peers.json")
    tmp = out + ".tmp"
    with open(tmp, "w", encoding="utf-8") as f:
        json.dump(report, f, indent=2)
        f.write("\n")
    os.replace(tmp, out)
    print(f"\nresults in {out}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
