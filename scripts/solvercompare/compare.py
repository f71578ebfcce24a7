#!/usr/bin/python3
"""Side-by-side timing of scipy's sparse solvers against trussmonitor's Go solver.

Run by the Go test TestCompareWithScipy in internal/sparse (see README.md
beside this file). The Go test writes, into one directory, every benchmark
matrix as a MatrixMarket file (lower triangle, symmetric), its right-hand
side and the Go solution as plain text, and a results.json with the Go
timings. This script factors and solves the same systems with

  * scipy.sparse.linalg.splu (SuperLU, default column ordering COLAMD), and
  * scipy.linalg.cholesky_banded (LAPACK dpbtrf) after
    scipy.sparse.csgraph.reverse_cuthill_mckee, and
  * with --cholmod, CHOLMOD (SuiteSparse, Debian's libsuitesparse-dev) through
    the small C program cholmod_solve.c beside this file, built here with gcc;
    CHOLMOD is a reference for the comparison only, never linked into the
    product,

checks that all solutions agree, and prints Markdown tables with ratios.
Set OPENBLAS_NUM_THREADS=1 before starting it (the Go test does) so the
BLAS runs on one thread.
"""
import argparse
import json
import os
import subprocess
import sys
import time

import numpy as np
import scipy
import scipy.io
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg
from scipy.sparse.csgraph import reverse_cuthill_mckee


def blas_description():
    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        return "BLAS: unknown (python3-threadpoolctl not installed)"
    parts = []
    for info in threadpool_info():
        if info.get("user_api") == "blas":
            parts.append("%s %s, kernel %s, %s thread(s)" % (
                info.get("internal_api"), info.get("version"),
                info.get("architecture"), info.get("num_threads")))
    return "BLAS: " + ("; ".join(parts) if parts else "none found")


def best_of(repeat, fn):
    """Run fn() repeat times; return the result of the fastest run and its time."""
    best = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        if best is None or dt < best[1]:
            best = (out, dt)
    return best


def run_splu(A, b, repeat):
    Acsc = A.tocsc()
    lu, t_factor = best_of(repeat, lambda: scipy.sparse.linalg.splu(Acsc))
    x, t_solve = best_of(repeat, lambda: lu.solve(b))
    return {"factor_s": t_factor, "solve_s": t_solve, "x": x,
            "nnz_lu": int(lu.L.nnz + lu.U.nnz)}


def band_lower(Ap):
    """LAPACK lower band storage ab[i-j, j] = A[i, j] of a permuted matrix."""
    low = scipy.sparse.tril(Ap).tocoo()
    k = int((low.row - low.col).max()) if low.nnz else 0
    ab = np.zeros((k + 1, Ap.shape[0]))
    ab[low.row - low.col, low.col] = low.data
    return ab, k


def run_banded(A, b, repeat):
    Acsr = A.tocsr()
    perm, t_rcm = best_of(repeat, lambda: reverse_cuthill_mckee(Acsr, symmetric_mode=True))
    (ab, k), t_build = best_of(1, lambda: band_lower(Acsr[perm][:, perm]))
    cb, t_factor = best_of(repeat, lambda: scipy.linalg.cholesky_banded(ab, lower=True, check_finite=False))
    y, t_solve = best_of(repeat, lambda: scipy.linalg.cho_solve_banded((cb, True), b[perm], check_finite=False))
    x = np.empty_like(y)
    x[perm] = y
    return {"order_s": t_rcm + t_build, "factor_s": t_factor, "solve_s": t_solve,
            "x": x, "halfband": k}


def build_cholmod(outdir):
    """Compile cholmod_solve.c into outdir; return the executable's path."""
    src = os.path.join(os.path.dirname(os.path.abspath(__file__)), "cholmod_solve.c")
    exe = os.path.join(outdir, "cholmod_solve")
    cmd = ["gcc", "-O2", "-o", exe, src, "-lcholmod"]
    try:
        subprocess.run(cmd, check=True, capture_output=True, text=True)
    except (OSError, subprocess.CalledProcessError) as e:
        detail = getattr(e, "stderr", "") or str(e)
        sys.exit("cannot build %s with gcc and libcholmod (apt-get install -y gcc libsuitesparse-dev): %s" % (src, detail))
    return exe


def run_cholmod(exe, base, c, repeat):
    """Factor and solve one system with CHOLMOD's default choices (AMD, or METIS
    nested dissection when AMD's fill is high; supernodal or simplicial as it
    decides)."""
    xpath = os.path.join(base, c["name"] + ".cholmod.x")
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    out = subprocess.run([exe, os.path.join(base, c["matrix"]), os.path.join(base, c["rhs"]), xpath, str(repeat)],
                         check=True, capture_output=True, text=True, env=env).stdout
    r = json.loads(out)
    r["x"] = np.loadtxt(xpath)
    return r


def reldiff(x, ref):
    return float(np.linalg.norm(x - ref) / np.linalg.norm(ref))


def backward_error(A, x, b):
    """Normwise backward error ||Ax-b|| / (||A|| ||x|| + ||b||), infinity norms
    (Rigal and Gaches 1967; Higham, Accuracy and Stability of Numerical
    Algorithms, 2nd ed., theorem 7.1). A backward-stable Cholesky gives a few
    units of 1e-16 however ill-conditioned A is; the solutions themselves may
    then differ by up to cond(A) times that."""
    r = A @ x - b
    normA = abs(A).sum(axis=1).max()
    return float(np.abs(r).max() / (normA * np.abs(x).max() + np.abs(b).max()))


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("results", help="results.json written by the Go test")
    ap.add_argument("--repeat", type=int, default=2, help="runs per timing, the fastest is kept")
    ap.add_argument("--max-backward", type=float, default=1e-12,
                    help="fail (exit 1) when the backward error of the Go solution exceeds this")
    ap.add_argument("--max-diff", type=float, default=float("inf"),
                    help="fail (exit 1) when a scipy solution differs from the Go one by more than this, relative "
                         "(use only for well-conditioned systems)")
    ap.add_argument("--no-banded", action="store_true", help="skip the banded LAPACK solver")
    ap.add_argument("--scipy-max-dof", type=int, default=150000,
                    help="skip scipy on larger systems (splu and banded LAPACK need minutes and gigabytes on the "
                         "300k-DOF roof grid)")
    ap.add_argument("--cholmod", action="store_true", help="also run CHOLMOD (needs gcc and libsuitesparse-dev)")
    ap.add_argument("--cholmod-repeat", type=int, default=3, help="runs per CHOLMOD timing, the fastest is kept")
    args = ap.parse_args()
    with open(args.results) as f:
        cases = json.load(f)
    base = os.path.dirname(os.path.abspath(args.results))
    print("scipy %s, numpy %s, python %s" % (scipy.__version__, np.__version__, sys.version.split()[0]))
    print(blas_description() + "; OPENBLAS_NUM_THREADS=%s" % os.environ.get("OPENBLAS_NUM_THREADS", "unset"))
    print()
    exe = build_cholmod(base) if args.cholmod else None
    rows, crows = [], []
    worst = 0.0
    failed = False
    for c in cases:
        A = scipy.io.mmread(os.path.join(base, c["matrix"])).tocsr()
        b = np.loadtxt(os.path.join(base, c["rhs"]))
        xgo = np.loadtxt(os.path.join(base, c["solution"]))
        eta_go = backward_error(A, xgo, b)
        go_total = c["order_s"] + c["factor_s"]
        diffs = []
        if c["dof"] <= args.scipy_max_dof:
            lu = run_splu(A, b, args.repeat)
            diffs.append(reldiff(xgo, lu["x"]))
            band = None
            if not args.no_banded:
                band = run_banded(A, b, args.repeat)
                diffs.append(reldiff(xgo, band["x"]))
            best = lu["factor_s"]
            row = [c["name"], str(c["dof"]), "%s/%s" % (c["method"], c["ordering"]),
                   "%.3f" % c["order_s"], "%.3f" % c["factor_s"], "%.3f" % go_total, "%.1f" % (1e3 * c["solve_s"]),
                   "%.3f" % lu["factor_s"], "%.1f" % (1e3 * lu["solve_s"])]
            if band:
                band_total = band["order_s"] + band["factor_s"]
                best = min(best, band_total)
                row += ["%.3f" % band["order_s"], "%.3f" % band["factor_s"], "%.3f" % band_total,
                        "%.1f" % (1e3 * band["solve_s"])]
            else:
                row += ["-"] * 4
            row += ["%.2f" % (go_total / lu["factor_s"]),
                    "%.2f" % (go_total / band_total) if band else "-",
                    "%.2f" % (go_total / best), "%.1e" % eta_go]
            rows.append(row)
        if exe:
            ch = run_cholmod(exe, base, c, args.cholmod_repeat)
            diffs.append(reldiff(xgo, ch["x"]))
            eta_ch = backward_error(A, ch["x"], b)
            go_fs = go_total + c["solve_s"]
            ch_fs = ch["analyze_s"] + ch["factor_s"] + ch["solve_s"]
            go_nnz = c.get("nnz_l_exact") or c["nnz_l"]
            crows.append([c["name"], str(c["dof"]), "%s/%s" % (c["method"], c["ordering"]),
                          "%.2f" % (go_nnz / 1e6), "%s/%s" % ("supernodal" if ch["supernodal"] else "simplicial", ch["ordering"]),
                          "%.2f" % (ch["lnz"] / 1e6), "%.2f" % (go_nnz / ch["lnz"]),
                          "%.3f" % c["order_s"], "%.3f" % (c["factor_s"] + c["solve_s"]), "%.3f" % go_fs,
                          "%.3f" % ch["analyze_s"], "%.3f" % (ch["factor_s"] + ch["solve_s"]), "%.3f" % ch_fs,
                          "%.2f" % (go_fs / ch_fs), "%.1e" % eta_go, "%.1e" % eta_ch])
        if diffs:
            worst = max([worst] + diffs)
        if (diffs and max(diffs) > args.max_diff) or not eta_go <= args.max_backward:
            failed = True
            print("MISMATCH %s: relative differences from the references %s, Go backward error %.3g" % (c["name"], diffs, eta_go),
                  file=sys.stderr)
        sys.stderr.write("done %s\n" % c["name"])
        sys.stderr.flush()
    if rows:
        print("| matrix | DOF | Go method | Go order s | Go factor s | Go total s | Go solve ms "
              "| splu factor s | splu solve ms | banded RCM+build s | banded factor s | banded total s | banded solve ms "
              "| Go/splu | Go/banded | Go/best scipy | Go backward error |")
        print("|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|")
        for row in rows:
            print("| " + " | ".join(row) + " |")
        print()
        print("Totals include the ordering (Go: ordering and symbolic analysis; banded: RCM and band storage; "
              "splu orders inside its factor time). Ratios below 1 mean the Go solver was faster.")
        print()
    if crows:
        print("CHOLMOD %s (SuiteSparse, default ordering choice: AMD, METIS nested dissection when AMD fills much), "
              "OPENBLAS_NUM_THREADS=1, best of %d; Go best of its runs:" % (crows and ch["version"], args.cholmod_repeat))
        print()
        print("| matrix | DOF | Go method | Go nnz(L) M | CHOLMOD method | CHOLMOD nnz(L) M | nnz Go/CHOLMOD "
              "| Go order s | Go factor+solve s | Go total s | CHOLMOD analyze s | CHOLMOD factor+solve s | CHOLMOD total s "
              "| time Go/CHOLMOD | Go backward error | CHOLMOD backward error |")
        print("|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|")
        for row in crows:
            print("| " + " | ".join(row) + " |")
        print()
        print("nnz(L): Go's supernodal count is exact (no amalgamation zeros), its band count is the band storage "
              "n(k+1); CHOLMOD's is its exact count (Common.lnz). Totals: ordering and symbolic analysis, numeric "
              "factorisation and one solve.")
    print("Largest relative difference between the Go and reference solutions: %.2g "
          "(bounded by about cond(A) times the backward error; the long bridges are very ill-conditioned)" % worst)
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
