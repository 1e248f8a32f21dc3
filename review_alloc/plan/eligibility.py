"""Which (reviewer, paper) pairs may be assigned, and why a pair may not.

A pair is eligible when neither side has withdrawn, it is not a conflict of interest, it is not
blocked, it is scored (or the policy counts unscored pairs as 0), and it passes the optional
policy rules: a minimum score and a shared topic. The reasons feed the explanations and the TUI.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import csr_matrix

from review_alloc.model import Session
from review_alloc.plan.conflicts import conflict_pairs

ELIGIBLE = "eligible"
WITHDRAWN = "withdrawn"
CONFLICT = "conflict"
BLOCKED = "blocked"
UNSCORED = "unscored"
BELOW_MIN_SCORE = "below min score"
NO_SHARED_TOPIC = "no shared topic"


@dataclass(frozen=True)
class ExcludedPair:
    """A pair the planner may not use, with the rule (`kind`) and the reason in words."""

    reviewer: str
    paper: str
    kind: str
    reason: str


def _topic_matrix(lists: list[list[str]], vocab: dict[str, int]) -> csr_matrix:
    rows: list[int] = []
    cols: list[int] = []
    for k, topics in enumerate(lists):
        for t in {" ".join(x.split()).casefold() for x in topics}:
            rows.append(k)
            cols.append(vocab.setdefault(t, len(vocab)))
    return csr_matrix(
        (np.ones(len(rows), dtype=np.int32), (rows, cols)), shape=(len(lists), max(len(vocab), 1))
    )


def shared_topic(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """Per pair of index arrays: do reviewer and paper share a topic (case and spaces folded)?"""
    vocab: dict[str, int] = {}
    rt = _topic_matrix([r.topics for r in session.reviewers], vocab)
    pt = _topic_matrix([p.topics for p in session.papers], vocab)
    width = max(len(vocab), 1)
    rt.resize((rt.shape[0], width))
    pt.resize((pt.shape[0], width))
    if len(reviewer) == 0:
        return np.zeros(0, dtype=bool)
    both = rt[np.asarray(reviewer)].multiply(pt[np.asarray(paper)])
    return np.asarray(both.sum(axis=1)).ravel() > 0


def rule_failures(
    session: Session, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """(below min score, no shared topic) boolean arrays for pairs given as index arrays."""
    policy = session.policy
    low = (
        score < policy.min_score - 1e-12
        if policy.min_score is not None
        else np.zeros(len(score), dtype=bool)
    )
    no_topic = (
        ~shared_topic(session, reviewer, paper)
        if policy.require_shared_topic
        else np.zeros(len(score), dtype=bool)
    )
    return low, no_topic


def _score_lookup(session: Session) -> dict[tuple[int, int], float]:
    t = session.scores
    return {
        (int(j), int(i)): float(v)
        for j, i, v in zip(t.reviewer.tolist(), t.paper.tolist(), t.value.tolist(), strict=True)
    }


def pair_status(session: Session, reviewer: str, paper: str) -> str:
    """`ELIGIBLE`, or the reason the pair cannot be assigned (the first rule it breaks)."""
    j = session.reviewer_index()[reviewer]
    i = session.paper_index()[paper]
    if session.reviewers[j].withdrawn or session.papers[i].withdrawn:
        return WITHDRAWN
    reasons = conflict_pairs(session).reason_of()
    if (j, i) in reasons:
        return f"{CONFLICT}: {reasons[(j, i)]}"
    if any(b.reviewer == reviewer and b.paper == paper for b in session.blocks):
        return BLOCKED
    t = session.scores
    hit = np.flatnonzero((t.reviewer == j) & (t.paper == i))
    pinned = any(p.reviewer == reviewer and p.paper == paper for p in session.pins)
    if len(hit) == 0 and session.policy.unscored == "exclude" and not pinned:
        return UNSCORED
    value = float(t.value[hit[0]]) if len(hit) else 0.0
    low, no_topic = rule_failures(session, np.array([j]), np.array([i]), np.array([value]))
    if low[0]:
        return f"{BELOW_MIN_SCORE} ({value:g} < {session.policy.min_score:g})"
    if no_topic[0]:
        return NO_SHARED_TOPIC
    return ELIGIBLE


def excluded_pairs(session: Session) -> list[ExcludedPair]:
    """Pairs the score rule would admit (scored ones, every pair under `unscored = "zero"`, and
    pins) that a rule excludes, each with its reason; unscored pairs under `"exclude"` are left
    out of the list (there are too many; `pair_status` names them)."""
    n_p = max(len(session.papers), 1)
    t = session.scores
    if session.policy.unscored == "zero":
        rr, pp = np.meshgrid(
            np.arange(len(session.reviewers)), np.arange(len(session.papers)), indexing="ij"
        )
        keys = rr.ravel().astype(np.int64) * n_p + pp.ravel()
    else:
        keys = np.unique(t.reviewer.astype(np.int64) * n_p + t.paper)
    r_at, p_at = session.reviewer_index(), session.paper_index()
    pin_keys = np.array(
        [r_at[p.reviewer] * n_p + p_at[p.paper] for p in session.pins], dtype=np.int64
    )
    keys = np.union1d(keys, pin_keys)
    reviewer, paper = keys // n_p, keys % n_p
    lookup = _score_lookup(session)
    score = np.array(
        [lookup.get((int(j), int(i)), 0.0) for j, i in zip(reviewer, paper, strict=True)]
    )
    low, no_topic = rule_failures(session, reviewer, paper, score)
    reasons = conflict_pairs(session).reason_of()
    blocked = {(r_at[b.reviewer], p_at[b.paper]): b.reason for b in session.blocks}
    gone_r = np.array([r.withdrawn for r in session.reviewers], dtype=bool)
    gone_p = np.array([p.withdrawn for p in session.papers], dtype=bool)
    out: list[ExcludedPair] = []
    for k, (j, i) in enumerate(zip(reviewer.tolist(), paper.tolist(), strict=True)):
        rid, pid = session.reviewers[j].id, session.papers[i].id
        if gone_r[j] or gone_p[i]:
            who = f"reviewer {rid}" if gone_r[j] else f"paper {pid}"
            out.append(ExcludedPair(rid, pid, WITHDRAWN, f"{who} has withdrawn"))
        elif (j, i) in reasons:
            out.append(ExcludedPair(rid, pid, CONFLICT, reasons[(j, i)]))
        elif (j, i) in blocked:
            why = blocked[(j, i)] or "blocked by the chair"
            out.append(ExcludedPair(rid, pid, BLOCKED, why))
        elif low[k]:
            limit = session.policy.min_score
            out.append(
                ExcludedPair(rid, pid, BELOW_MIN_SCORE, f"score {score[k]:g} is below {limit:g}")
            )
        elif no_topic[k]:
            out.append(ExcludedPair(rid, pid, NO_SHARED_TOPIC, "reviewer and paper share no topic"))
    return out
