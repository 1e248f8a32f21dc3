"""A reference written from the README's "What optimal means" alone: sequential HiGHS programs.

Every rule a chair can set is one more row or stage here (seniors as a tier or a hard rule, the
institution limit, eligibility by minimum score and shared topic, pins, blocks, allowed
overloads, the bottleneck, reviewer floors, the kept pairs of a re-plan, the balance penalty).
Each stage maximises one tier over the optimum of the stages above it (HiGHS via
scipy.optimize.milp, integer pair variables). Eligibility is read from the session's rows only
(declared conflicts, blocks, scores, topics); nothing here calls planner code.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp

from review_alloc.model import Plan, Session

COUNT_TIERS = ("required", "seniors", "coverage", "overload", "floors", "kept")


@dataclass(frozen=True)
class MatrixInstance:
    """A session in index form: pairs, their scores and pins, and every rule's numbers."""

    pairs: np.ndarray
    score: np.ndarray
    pinned: np.ndarray
    earlier: np.ndarray
    cap: np.ndarray
    allowance: np.ndarray
    floor: np.ndarray
    reviews: np.ndarray
    minimum: np.ndarray
    need: np.ndarray
    senior: np.ndarray
    institution: list[str]
    limit: int | None
    hard: bool
    balance: float


def matrix_instance(session: Session, earlier: Plan | None = None) -> MatrixInstance:
    """Read the instance from the session's rows (declared conflicts only)."""
    pol = session.policy
    rid = {r.id: j for j, r in enumerate(session.reviewers)}
    pid = {p.id: i for i, p in enumerate(session.papers)}
    banned = {(rid[c.reviewer], pid[c.paper]) for c in session.conflicts}
    banned |= {(rid[b.reviewer], pid[b.paper]) for b in session.blocks}
    pins = {(rid[p.reviewer], pid[p.paper]) for p in session.pins}
    table = session.scores
    scores = {
        (int(j), int(i)): float(v)
        for j, i, v in zip(table.reviewer, table.paper, table.value, strict=True)
    }
    pairs = []
    for j, r in enumerate(session.reviewers):
        for i, p in enumerate(session.papers):
            value = scores.get((j, i))
            if (j, i) in pins:
                pairs.append((j, i))
            elif (j, i) in banned or (value is None and pol.unscored == "exclude"):
                continue
            elif pol.min_score is not None and (value or 0.0) < pol.min_score:
                continue
            elif pol.require_shared_topic and not set(r.topics) & set(p.topics):
                continue
            else:
                pairs.append((j, i))
    kept = set()
    if earlier is not None:
        kept = {(rid[a.reviewer], pid[a.paper]) for a in earlier.assignments}
    reviews = np.array([p.reviews or pol.reviews for p in session.papers])
    minimum = np.array(
        [
            min(p.min_reviews if p.min_reviews is not None else pol.min_reviews, reviews[i])
            for i, p in enumerate(session.papers)
        ]
    )
    need = np.array(
        [
            min(p.senior_min if p.senior_min is not None else pol.senior_min, reviews[i])
            for i, p in enumerate(session.papers)
        ]
    )
    cap = np.array([r.cap if r.cap is not None else pol.cap for r in session.reviewers])
    floor = np.array([r.floor if r.floor is not None else pol.floor for r in session.reviewers])
    allowance = np.array(
        [
            r.overload if r.overload is not None else pol.overload_allowance
            for r in session.reviewers
        ]
    )
    return MatrixInstance(
        pairs=np.array(pairs, dtype=np.int64).reshape(-1, 2),
        score=np.array([scores.get(p, 0.0) for p in pairs]),
        pinned=np.array([p in pins for p in pairs], dtype=bool),
        earlier=np.array([p in kept for p in pairs], dtype=bool),
        cap=cap,
        allowance=allowance,
        floor=np.minimum(floor, cap),
        reviews=reviews,
        minimum=minimum,
        need=need,
        senior=np.array([r.senior for r in session.reviewers], dtype=bool),
        institution=[" ".join(r.institution.split()).casefold() for r in session.reviewers],
        limit=pol.max_per_institution,
        hard=pol.senior_hard,
        balance=pol.balance,
    )


def _stages(
    inst: MatrixInstance, keep: np.ndarray, last: str = "score"
) -> dict[str, float] | None:
    """Tier values over the pairs `keep` down to tier `last`; None when the hard rules cannot
    all be met."""
    pairs, n_r, n_p = inst.pairs[keep], len(inst.cap), len(inst.reviews)
    n_e = len(pairs)
    slots = inst.cap + inst.allowance
    units = [(j, k) for j in range(n_r) for k in range(int(slots[j]))]
    # Variables: x pairs, y required part, s senior part, z floor part, o overload, u units.
    ox, oy, os_, oz, oo, ou = 0, n_e, n_e + n_p, n_e + 2 * n_p, n_e + 2 * n_p + n_r, 0
    ou = oo + n_r
    n_var = ou + len(units)
    rows: list[np.ndarray] = []
    lo: list[float] = []
    hi: list[float] = []

    def row(coef: dict[int, float], low: float, high: float) -> None:
        r = np.zeros(n_var)
        for k, v in coef.items():
            r[k] += v
        rows.append(r)
        lo.append(low)
        hi.append(high)

    for i in range(n_p):
        on = np.flatnonzero(pairs[:, 1] == i)
        row({ox + e: 1.0 for e in on}, 0.0, float(inst.reviews[i]))
        row({oy + i: 1.0, **{ox + e: -1.0 for e in on}}, -np.inf, 0.0)
        seniors = [int(e) for e in on if inst.senior[pairs[e, 0]]]
        row({os_ + i: 1.0, **{ox + e: -1.0 for e in seniors}}, -np.inf, 0.0)
        if inst.hard:
            row({ox + e: 1.0 for e in seniors}, float(inst.need[i]), np.inf)
        if inst.limit is not None:
            by_lab: dict[str, list[int]] = {}
            for e in on:
                lab = inst.institution[pairs[e, 0]]
                if lab:
                    by_lab.setdefault(lab, []).append(int(e))
            for members in by_lab.values():
                row({ox + e: 1.0 for e in members}, -np.inf, float(inst.limit))
    for j in range(n_r):
        load = {ox + int(e): 1.0 for e in np.flatnonzero(pairs[:, 0] == j)}
        row({**load, oo + j: -1.0}, -np.inf, float(inst.cap[j]))
        row({oz + j: 1.0, **{k: -v for k, v in load.items()}}, -np.inf, 0.0)
        mine = {ou + u: -1.0 for u, (jj, _) in enumerate(units) if jj == j}
        row({**load, **mine}, 0.0, 0.0)
    lb = np.zeros(n_var)
    ub = np.ones(n_var)
    lb[ox:oy] = inst.pinned[keep]
    ub[oy:os_] = inst.minimum
    ub[os_:oz] = inst.need
    ub[oz:oo] = inst.floor
    ub[oo:ou] = inst.allowance
    integrality = np.zeros(n_var)
    integrality[ox:oy] = 1
    integrality[ou:] = 1
    objectives: dict[str, np.ndarray] = {}
    for name, lo_k, hi_k in (
        ("required", oy, os_),
        ("seniors", os_, oz),
        ("coverage", ox, oy),
        ("floors", oz, oo),
    ):
        c = np.zeros(n_var)
        c[lo_k:hi_k] = 1.0
        objectives[name] = c
    objectives["overload"] = np.zeros(n_var)
    objectives["overload"][oo:ou] = -1.0
    objectives["kept"] = np.zeros(n_var)
    objectives["kept"][ox:oy] = inst.earlier[keep]
    score = np.zeros(n_var)
    score[ox:oy] = inst.score[keep]
    # The balance penalty: the k-th paper of a reviewer (k from 0) costs balance * k.
    score[ou:] = [-inst.balance * k for _, k in units]
    objectives["score"] = score
    values: dict[str, float] = {}
    order = (*COUNT_TIERS, "score")
    for name in order[: order.index(last) + 1]:
        c = objectives[name]
        res = milp(
            -c,
            constraints=LinearConstraint(np.array(rows), lo, hi),
            bounds=Bounds(lb, ub),
            integrality=integrality,
        )
        if res.status == 2:
            return None
        assert res.status == 0, (name, res.message)
        values[name] = -res.fun
        rows.append(c)
        # Count tiers are whole numbers: half a unit of slack keeps each stage exact.
        lo.append(-res.fun - (1e-6 if name == "score" else 0.5))
        hi.append(np.inf)
    return values


def matrix_optimum(inst: MatrixInstance, bottleneck: bool = False) -> dict[str, float] | None:
    """The README's tiers, highest first; with `bottleneck`, also the highest threshold that
    keeps required reviews, seniors and all reviews at their optimum (pins exempt)."""
    every = np.ones(len(inst.pairs), dtype=bool)
    base = _stages(inst, every)
    if base is None or not bottleneck:
        return base
    for t in sorted(set(inst.score[~inst.pinned].tolist()), reverse=True):
        keep = inst.pinned | (inst.score >= t - 1e-9)
        top = _stages(inst, keep, last="coverage")
        if top is not None and all(
            top[k] >= base[k] - 1e-6 for k in ("required", "seniors", "coverage")
        ):
            values = _stages(inst, keep)
            assert values is not None
            return {**values, "bottleneck": t}
    return base
