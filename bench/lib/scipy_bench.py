"""The scipy side of `npm run bench:solver`.

Reads a JSON manifest on stdin naming instance files the Node side wrote (raw
little-endian Float64 / Int32 arrays), and times only the solver call with
time.perf_counter: scipy.optimize.linear_sum_assignment for dense matrices,
scipy.sparse.csgraph.min_weight_full_bipartite_matching for sparse ones. Loading
and building the matrices is outside the timed region; a dense case is first solved
untimed until "warmSolves" solves or "warmMs" of solving have passed (the warm-up
rule every solver of the bench follows); no new repeat starts once a case's
"budgetMs" of solving is spent. Prints one JSON object.
"""

import json
import os
import platform
import sys
import time

import numpy as np
import scipy
from scipy.optimize import linear_sum_assignment
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import min_weight_full_bipartite_matching


def load(case, name, dtype):
    return np.fromfile(os.path.join(case["dir"], name), dtype=dtype)


def warm_up(case, solve):
    """Untimed solves first, by the same rule as the Node children (see bench/solver.ts)."""
    spent, done = 0.0, 0
    while done < case.get("warmSolves", 0) and spent < case.get("warmMs", 0):
        t0 = time.perf_counter()
        solve()
        spent += (time.perf_counter() - t0) * 1000
        done += 1


def dense(case):
    a = load(case, "cost.f64", "<f8").reshape(case["nRows"], case["nCols"])
    warm_up(case, lambda: linear_sum_assignment(a))
    times, cost = [], None
    while len(times) < case["repeats"] and sum(times) < case.get("budgetMs", float("inf")):
        t0 = time.perf_counter()
        r, c = linear_sum_assignment(a)
        times.append((time.perf_counter() - t0) * 1000)
        cost = float(a[r, c].sum())
    return {"ms": times, "cost": cost}


def sparse(case):
    n_rows, n_cols = case["nRows"], case["nCols"]
    ptr = load(case, "rowptr.i32", "<i4")
    idx = load(case, "colidx.i32", "<i4")
    w = load(case, "cost.f64", "<f8")
    offset = 0.0
    if case.get("delta"):
        # A row's "unmatched" option becomes a private column at cost δ, so a full
        # matching of the rows is exactly the instance's optimum.
        delta = load(case, "delta.f64", "<f8")
        lens = np.diff(ptr)
        rows = np.repeat(np.arange(n_rows), lens)
        rows = np.concatenate([rows, np.arange(n_rows)])
        cols = np.concatenate([idx, n_cols + np.arange(n_rows)])
        vals = np.concatenate([w, delta])
        order = np.argsort(rows, kind="stable")
        rows, cols, vals = rows[order], cols[order], vals[order]
        ptr = np.concatenate([[0], np.cumsum(np.bincount(rows, minlength=n_rows))]).astype(np.int64)
        idx, w = cols, vals
        n_cols = n_cols + n_rows
    low = float(w.min()) if len(w) else 1.0
    if low <= 0:
        # Explicit zeros are not edges in scipy.sparse: shift every pair by the same
        # amount; each row is matched once, so the optimum moves by n_rows × offset.
        offset = 1.0 - low
    m = csr_matrix((w + offset, idx, ptr), shape=(n_rows, n_cols))
    times, cost = [], None
    while len(times) < case["repeats"] and sum(times) < case.get("budgetMs", float("inf")):
        t0 = time.perf_counter()
        r, c = min_weight_full_bipartite_matching(m)
        times.append((time.perf_counter() - t0) * 1000)
        cost = float(np.asarray(m[r, c]).ravel().sum()) - offset * len(r)
    return {"ms": times, "cost": cost}


def main():
    manifest = json.load(sys.stdin)
    out = {
        "python": platform.python_version(),
        "scipy": scipy.__version__,
        "numpy": np.__version__,
        "results": {},
    }
    for case in manifest["cases"]:
        try:
            out["results"][case["name"]] = dense(case) if case["kind"] == "dense" else sparse(case)
        except Exception as err:  # report, keep going: one bad case must not hide the rest
            out["results"][case["name"]] = {"error": f"{type(err).__name__}: {err}"}
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
