"""Reference planners built only from outside libraries, for differential tests of the planner.

The lexicographic objective of DESIGN.md is solved here by sequential linear programs with HiGHS
(scipy.optimize.linprog): each stage maximises one tier over the optimal face of the previous
stages. A face of an integral polytope is integral, so the stage optima are the exact integer
optima. Networkx/OR-tools give the maximum coverage independently.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import linprog
from scipy.sparse import csr_matrix, vstack


@dataclass(frozen=True)
class Instance:
    """A planning instance in index form; `pairs` are the eligible (reviewer, paper) pairs."""

    cap: np.ndarray
    floor: np.ndarray
    reviews: np.ndarray
    min_reviews: np.ndarray
    pairs: np.ndarray  # shape (E, 2): reviewer, paper
    score: np.ndarray  # per pair
    pinned: np.ndarray | None = None  # bool per pair


def lexicographic_optimum(inst: Instance) -> tuple[int, int, int, float]:
    """(required coverage, coverage, floors met, total score) by sequential HiGHS LPs."""
    n_r, n_p, n_e = len(inst.cap), len(inst.reviews), len(inst.pairs)
    # variables: x (E pairs), y (P, required part), z (R, floor part)
    n_var = n_e + n_p + n_r
    rows, cols, vals = [], [], []
    b: list[float] = []
    r = 0
    for i in range(n_p):  # sum_j x_ij <= reviews_i
        for e in np.flatnonzero(inst.pairs[:, 1] == i):
            rows.append(r)
            cols.append(e)
            vals.append(1.0)
        b.append(float(inst.reviews[i]))
        r += 1
    for j in range(n_r):  # sum_i x_ij <= cap_j
        for e in np.flatnonzero(inst.pairs[:, 0] == j):
            rows.append(r)
            cols.append(e)
            vals.append(1.0)
        b.append(float(inst.cap[j]))
        r += 1
    for i in range(n_p):  # y_i - sum_j x_ij <= 0
        rows.append(r)
        cols.append(n_e + i)
        vals.append(1.0)
        for e in np.flatnonzero(inst.pairs[:, 1] == i):
            rows.append(r)
            cols.append(e)
            vals.append(-1.0)
        b.append(0.0)
        r += 1
    for j in range(n_r):  # z_j - sum_i x_ij <= 0
        rows.append(r)
        cols.append(n_e + n_p + j)
        vals.append(1.0)
        for e in np.flatnonzero(inst.pairs[:, 0] == j):
            rows.append(r)
            cols.append(e)
            vals.append(-1.0)
        b.append(0.0)
        r += 1
    a_ub = csr_matrix((vals, (rows, cols)), shape=(r, n_var))
    b_ub = np.array(b)
    lower_x = inst.pinned.astype(float) if inst.pinned is not None else np.zeros(n_e)
    bounds = (
        [(lower_x[e], 1.0) for e in range(n_e)]
        + [(0.0, float(m)) for m in inst.min_reviews]
        + [(0.0, float(f)) for f in inst.floor]
    )
    objectives = []
    c1 = np.zeros(n_var)
    c1[n_e : n_e + n_p] = 1.0
    c2 = np.zeros(n_var)
    c2[:n_e] = 1.0
    c3 = np.zeros(n_var)
    c3[n_e + n_p :] = 1.0
    c4 = np.zeros(n_var)
    c4[:n_e] = inst.score
    values: list[float] = []
    for c in (c1, c2, c3, c4):
        res = linprog(-c, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs")
        assert res.status == 0, res.message
        best = -res.fun
        values.append(best)
        objectives.append(c)
        # keep the optimal face: c @ x >= best (with a small slack for round-off)
        a_ub = vstack([a_ub, csr_matrix(-c.reshape(1, -1))]).tocsr()
        b_ub = np.append(b_ub, -best + 1e-7)
    return round(values[0]), round(values[1]), round(values[2]), values[3]
