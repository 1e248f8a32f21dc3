"""An outside reference for the chair rules: sequential integer programs solved by HiGHS.

Everything the planner optimises is written here as a plain mixed-integer model and solved with
HiGHS through `scipy.optimize.milp`, one tier after another (each stage maximises one tier over
the optimal set of the previous stages). Integer variables make the reference exact even where
the institution and senior rules cross and no flow model exists. Eligibility is computed from
the session's rows only (declared conflicts, blocks, scores, topics), not with planner code.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import lil_matrix, vstack

from review_alloc.model import Plan, Session

TIERS = ("required", "seniors", "coverage", "floors", "score")


@dataclass(frozen=True)
class RuleInstance:
    """A planning instance with the chair rules, in index form."""

    cap: np.ndarray
    floor: np.ndarray
    reviews: np.ndarray
    min_reviews: np.ndarray
    senior_need: np.ndarray
    senior: np.ndarray  # bool per reviewer
    institution: list[str]  # per reviewer, "" for none
    pairs: np.ndarray  # (E, 2) reviewer, paper
    score: np.ndarray
    pinned: np.ndarray
    max_per_institution: int | None
    senior_hard: bool
    balance: float
    earlier: np.ndarray | None = None
    """Per pair: assigned by the earlier plan of a re-plan (None: a fresh plan, no kept tier)."""


def rule_instance(session: Session, earlier: Plan | None = None) -> RuleInstance:
    """Read the instance straight from the session's rows (declared conflicts only); with
    `earlier`, a re-plan that keeps as many of that plan's pairs as the higher tiers allow."""
    pol = session.policy
    rid = {r.id: j for j, r in enumerate(session.reviewers)}
    pid = {p.id: i for i, p in enumerate(session.papers)}
    banned = {(rid[c.reviewer], pid[c.paper]) for c in session.conflicts}
    banned |= {(rid[b.reviewer], pid[b.paper]) for b in session.blocks}
    pinned = {(rid[p.reviewer], pid[p.paper]) for p in session.pins}
    score = {
        (int(j), int(i)): float(v)
        for j, i, v in zip(
            session.scores.reviewer, session.scores.paper, session.scores.value, strict=True
        )
    }
    pairs = []
    for j, r in enumerate(session.reviewers):
        for i, p in enumerate(session.papers):
            if (j, i) in pinned:
                pairs.append((j, i))
                continue
            if (j, i) in banned:
                continue
            if (j, i) not in score and pol.unscored == "exclude":
                continue
            value = score.get((j, i), 0.0)
            if pol.min_score is not None and value < pol.min_score:
                continue
            if pol.require_shared_topic and not (set(r.topics) & set(p.topics)):
                continue
            pairs.append((j, i))
    cap = np.array([r.cap if r.cap is not None else pol.cap for r in session.reviewers])
    floor = np.array([r.floor if r.floor is not None else pol.floor for r in session.reviewers])
    reviews = np.array(
        [p.reviews if p.reviews is not None else pol.reviews for p in session.papers]
    )
    minimum = np.array(
        [
            p.min_reviews if p.min_reviews is not None else min(pol.min_reviews, reviews[i])
            for i, p in enumerate(session.papers)
        ]
    )
    need = np.array(
        [
            min(p.senior_min if p.senior_min is not None else pol.senior_min, reviews[i])
            for i, p in enumerate(session.papers)
        ]
    )
    arr = np.array(pairs, dtype=np.int64).reshape(-1, 2)
    before = {
        (rid[a.reviewer], pid[a.paper])
        for a in (earlier.assignments if earlier is not None else [])
        if a.reviewer in rid and a.paper in pid
    }
    return RuleInstance(
        cap=cap,
        floor=np.minimum(floor, cap),
        reviews=reviews,
        min_reviews=minimum,
        senior_need=need,
        senior=np.array([r.senior for r in session.reviewers], dtype=bool),
        institution=[" ".join(r.institution.split()).casefold() for r in session.reviewers],
        pairs=arr,
        score=np.array([score.get((j, i), 0.0) for j, i in pairs]),
        pinned=np.array([(j, i) in pinned for j, i in pairs], dtype=bool),
        max_per_institution=pol.max_per_institution,
        senior_hard=pol.senior_hard,
        balance=pol.balance,
        earlier=None
        if earlier is None
        else np.array([(j, i) in before for j, i in pairs], dtype=bool),
    )


def lexicographic_rules_optimum(inst: RuleInstance) -> dict[str, float] | None:
    """Tier values by sequential HiGHS integer programs; None when a hard rule is infeasible.

    A re-plan (`inst.earlier`) has a "kept" tier (earlier pairs assigned again) between floors
    and score, as the README's order says.
    """
    n_r, n_p, n_e = len(inst.cap), len(inst.reviews), len(inst.pairs)
    units = [(j, k) for j in range(n_r) for k in range(int(inst.cap[j]))]
    # variables: x (E), y required part (P), s senior part (P), z floor part (R), u load units
    ox, oy, os_, oz, ou = 0, n_e, n_e + n_p, n_e + 2 * n_p, n_e + 2 * n_p + n_r
    n_var = ou + len(units)
    rows: list[tuple[dict[int, float], float, float]] = []
    on_paper = [np.flatnonzero(inst.pairs[:, 1] == i) for i in range(n_p)]
    of_reviewer = [np.flatnonzero(inst.pairs[:, 0] == j) for j in range(n_r)]
    for i in range(n_p):
        rows.append(({ox + e: 1.0 for e in on_paper[i]}, 0.0, float(inst.reviews[i])))
        rows.append(({oy + i: 1.0, **{ox + e: -1.0 for e in on_paper[i]}}, -np.inf, 0.0))
        seniors = [e for e in on_paper[i] if inst.senior[inst.pairs[e, 0]]]
        rows.append(({os_ + i: 1.0, **{ox + e: -1.0 for e in seniors}}, -np.inf, 0.0))
        if inst.senior_hard:
            rows.append(({ox + e: 1.0 for e in seniors}, float(inst.senior_need[i]), np.inf))
        if inst.max_per_institution is not None:
            groups: dict[str, list[int]] = {}
            for e in on_paper[i]:
                name = inst.institution[inst.pairs[e, 0]]
                if name:
                    groups.setdefault(name, []).append(int(e))
            for members in groups.values():
                rows.append(
                    ({ox + e: 1.0 for e in members}, -np.inf, float(inst.max_per_institution))
                )
    for j in range(n_r):
        load = {ox + e: 1.0 for e in of_reviewer[j]}
        rows.append((load, 0.0, float(inst.cap[j])))
        rows.append(({oz + j: 1.0, **{k: -v for k, v in load.items()}}, -np.inf, 0.0))
        unit = {ou + u: -1.0 for u, (jj, _) in enumerate(units) if jj == j}
        rows.append(({**load, **unit}, 0.0, 0.0))
    a = lil_matrix((len(rows), n_var))
    lo, hi = [], []
    for r, (coef, low, high) in enumerate(rows):
        for c, v in coef.items():
            a[r, c] = v
        lo.append(low)
        hi.append(high)
    lb = np.zeros(n_var)
    ub = np.ones(n_var)
    lb[ox : ox + n_e] = inst.pinned
    ub[oy : oy + n_p] = inst.min_reviews
    ub[os_ : os_ + n_p] = inst.senior_need
    ub[oz : oz + n_r] = inst.floor
    integrality = np.zeros(n_var)
    integrality[ox : ox + n_e] = 1
    stages = []
    c = np.zeros(n_var)
    c[oy : oy + n_p] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[os_ : os_ + n_p] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[ox : ox + n_e] = 1
    stages.append(c)
    c = np.zeros(n_var)
    c[oz : oz + n_r] = 1
    stages.append(c)
    names = list(TIERS)
    if inst.earlier is not None:
        c = np.zeros(n_var)
        c[ox : ox + n_e] = inst.earlier
        stages.append(c)
        names.insert(names.index("score"), "kept")
    c = np.zeros(n_var)
    c[ox : ox + n_e] = inst.score
    # The balance penalty: the k-th unit of a reviewer's load costs balance * k (k from 0).
    c[ou:] = [-inst.balance * k for _, k in units]
    stages.append(c)
    values: dict[str, float] = {}
    matrix = a.tocsr()
    lows, highs = list(lo), list(hi)
    for name, c in zip(names, stages, strict=True):
        res = milp(
            -c,
            constraints=LinearConstraint(matrix, lows, highs),
            bounds=Bounds(lb, ub),
            integrality=integrality,
        )
        if res.status == 2:  # infeasible: a hard rule (or the pins) cannot be met
            return None
        assert res.status == 0, (name, res.message)
        best = -res.fun
        values[name] = best
        matrix = vstack([matrix, c.reshape(1, -1)]).tocsr()
        # Count tiers are whole numbers at every integer point: half a unit of slack keeps the
        # stage exact, where a hair's slack left HiGHS stuck on nearly parallel rows.
        lows.append(best - (1e-6 if name == "score" else 0.5))
        highs.append(np.inf)
    return values
