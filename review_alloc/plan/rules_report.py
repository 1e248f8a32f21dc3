"""What the chair's rules did to a plan: seniors, institutions, leads, loads, and gap reasons.

Everything here is recomputed from the session and the plan's assignments, so a saved plan
reports the same figures as a fresh one.
"""

from __future__ import annotations

from collections import Counter
from typing import Any

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import normalise_institution
from review_alloc.plan.figures import active_demands, assignment_indices, loads_and_counts
from review_alloc.plan.rules import PairRules
from review_alloc.plan.seniors import paper_senior_need


def load_distribution(session: Session, loads: np.ndarray) -> dict[str, Any]:
    """Min, max, mean, spread (max - min) and histogram (reviewers per load) of active loads."""
    active = ~np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    chosen = np.asarray(loads, dtype=np.int64)[active]
    if len(chosen) == 0:
        return {"min": 0, "max": 0, "mean": 0.0, "spread": 0, "histogram": []}
    return {
        "min": int(chosen.min()),
        "max": int(chosen.max()),
        "mean": round(float(chosen.mean()), 3),
        "spread": int(chosen.max() - chosen.min()),
        "histogram": np.bincount(chosen).astype(int).tolist(),
    }


def paper_details(session: Session, plan: Plan) -> list[dict[str, Any]]:
    """Per active paper: reviewers, lead, seniors (and how many are wanted), institutions."""
    senior = {r.id: r.senior for r in session.reviewers}
    where = {r.id: r.institution for r in session.reviewers}
    need = paper_senior_need(session)
    by_paper: dict[str, list] = {}
    for a in plan.assignments:
        by_paper.setdefault(a.paper, []).append(a)
    out = []
    for i, p in enumerate(session.papers):
        if p.withdrawn:
            continue
        rows = by_paper.get(p.id, [])
        out.append(
            {
                "paper": p.id,
                "reviewers": [a.reviewer for a in rows],
                "lead": next((a.reviewer for a in rows if a.lead), None),
                "seniors": [a.reviewer for a in rows if senior[a.reviewer]],
                "senior_min": int(need[i]),
                "institutions": dict(Counter(where[a.reviewer] for a in rows if where[a.reviewer])),
            }
        )
    return out


def _eligible_by_paper(session: Session) -> dict[int, np.ndarray]:
    """Reviewer indices of each paper's eligible candidates (every pair rule applied)."""
    reviewer, paper, _, _, _ = PairRules(session).eligible_pairs()
    out: dict[int, np.ndarray] = {}
    order = np.argsort(paper, kind="stable")
    rr, pp = reviewer[order], paper[order]
    bounds = np.searchsorted(pp, np.arange(len(session.papers) + 1))
    for i in range(len(session.papers)):
        out[i] = rr[bounds[i] : bounds[i + 1]]
    return out


def _shortfall_reason(
    session: Session,
    candidates: np.ndarray,
    assigned: set[int],
    loads: np.ndarray,
    cap: np.ndarray,
    what: str,
) -> str:
    """Why a paper could not get more `what` reviewers, in a short sentence."""
    free = [int(j) for j in candidates if int(j) not in assigned]
    if not len(candidates):
        return f"no eligible {what} reviewer"
    if not free:
        return f"all {len(candidates)} eligible {what} reviewers are already on it"
    at_cap = sum(1 for j in free if loads[j] >= cap[j])
    if at_cap == len(free):
        return f"the other {len(free)} eligible {what} reviewers are all at their caps"
    m = session.policy.max_per_institution
    if m is not None:
        on_paper = Counter(
            normalise_institution(session.reviewers[j].institution) for j in assigned
        )
        limited = sum(
            1
            for j in free
            if loads[j] < cap[j]
            and on_paper[normalise_institution(session.reviewers[j].institution)] >= m
            and normalise_institution(session.reviewers[j].institution)
        )
        if limited:
            return (
                f"{at_cap} eligible {what} reviewers are at their caps and {limited} are kept "
                f"off by max_per_institution {m}"
            )
    return (
        f"{at_cap} of {len(free)} other eligible {what} reviewers are at their caps; the rest "
        "are needed for higher tiers elsewhere"
    )


def rule_report(session: Session, plan: Plan) -> dict[str, Any]:
    """The `seniors`, `institutions`, `leads`, lowest scores and `gap_reasons` parts of the plan
    summary."""
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    loads, counts = loads_and_counts(session, reviewer, paper)
    reviews, _, cap, _ = active_demands(session)
    need = paper_senior_need(session)
    senior = session.reviewer_senior_array()
    have = np.bincount(paper[senior[reviewer]], minlength=len(session.papers))
    on_paper: dict[int, set[int]] = {}
    for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
        on_paper.setdefault(i, set()).add(j)
    short_ids = np.flatnonzero(have < need)
    gap_ids = np.flatnonzero(counts < reviews)
    eligible = _eligible_by_paper(session) if len(short_ids) or len(gap_ids) else {}
    short = [
        {
            "paper": session.papers[i].id,
            "seniors": int(have[i]),
            "senior_min": int(need[i]),
            "reason": _shortfall_reason(
                session,
                eligible[i][senior[eligible[i]]],
                on_paper.get(i, set()),
                loads,
                cap,
                "senior",
            ),
        }
        for i in short_ids
    ]
    gap_reasons = {
        session.papers[i].id: _shortfall_reason(
            session, eligible[i], on_paper.get(i, set()), loads, cap, "candidate"
        )
        for i in gap_ids
    }
    m = session.policy.max_per_institution
    names = [normalise_institution(r.institution) for r in session.reviewers]
    per = Counter((i, names[j]) for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True))
    most = max((c for (_, name), c in per.items() if name), default=0)
    # Reviewers without an institution share no institution: they never count against the limit.
    over = 0 if m is None else sum(1 for (_, name), c in per.items() if name and c > m)
    pinned = {(p.reviewer, p.paper) for p in session.pins}
    scores = [a.score for a in plan.assignments]
    free_scores = [a.score for a in plan.assignments if (a.reviewer, a.paper) not in pinned]
    leads = [a for a in plan.assignments if a.lead]
    led = {a.paper for a in leads}
    lead_senior = {
        a.paper for a in leads if session.reviewers[session.reviewer_index()[a.reviewer]].senior
    }
    with_reviews = sorted({a.paper for a in plan.assignments})
    return {
        "seniors": {
            "hard": session.policy.senior_hard,
            "wanted": int(need.sum()),
            "met": int(np.minimum(have, need).sum()),
            "short": short,
        },
        "institutions": {
            "max_per_institution": m,
            "most_on_one_paper": int(most),
            "over_limit": over,
        },
        "leads": {
            "max_leads": session.policy.max_leads,
            "picked": len(leads),
            "senior_leads": len(lead_senior),
            "no_lead": [p for p in with_reviews if p not in led],
            "no_senior_lead": [p for p in with_reviews if p not in lead_senior],
        },
        # The lowest score of any assigned pair, pins included, and the lowest of the pairs
        # that are not pinned: the figure the bottleneck option raises (a pin may score lower).
        "lowest_score": round(float(min(scores)), 6) if scores else None,
        "lowest_unpinned_score": round(float(min(free_scores)), 6) if free_scores else None,
        "gap_reasons": gap_reasons,
    }
