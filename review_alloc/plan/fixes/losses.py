"""Conflicts and blocks: which of them keep the most reviews away, shown as information only.

No fix lifts a conflict of interest or a block; this only says what they cost.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from review_alloc.plan.explain import CoverageNetwork, coverage_network
from review_alloc.plan.pairkeys import contains
from review_alloc.plan.rules import candidate_pairs

_EVALUATED_REVIEWERS = 200
"""Reviewers (most pairs first) whose pairs are weighed together exactly; past them, gain 1."""


@dataclass(frozen=True)
class PairLoss:
    """Conflicted or blocked pairs of one reviewer and what allowing them would add (info only)."""

    reviewer: str
    kind: str
    papers: tuple[str, ...]
    reasons: tuple[str, ...]
    gain: int
    """Reviews the plan would gain if these pairs were allowed (one pair alone: exactly 1)."""
    exact: bool = True
    """False when, past the evaluated reviewers, `gain` is only the lower bound 1."""


def pair_losses(cov: CoverageNetwork) -> tuple[PairLoss, ...]:
    """Per reviewer, the conflicted or blocked pairs that keep reviews away (never lifted).

    A single pair (r, p) adds a review exactly when r is reachable from the source and p can
    reach the sink in the residual graph, so only those pairs are listed; each reviewer's pairs
    are then weighed together by one more maximum flow (for the reviewers with most pairs).
    """
    session, net = cov.session, cov.plan_net
    n_p = net.n_papers
    if cov.shortfall == 0:
        return ()
    cand_r, cand_p, _ = candidate_pairs(session)
    keys = cand_r * n_p + cand_p
    reasons = net.conflicts.reason_of()
    conflicted = contains(keys, net.conflicts.keys(n_p))
    block_reason: dict[tuple[int, int], str] = {}
    if session.blocks:
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        for b in session.blocks:
            block_reason[(reviewer_at[b.reviewer], paper_at[b.paper])] = b.reason or "blocked"
    useful = cov.source_reach[1 + cand_r] & cov.sink_reach[1 + net.n_reviewers + cand_p]
    found: dict[tuple[int, str], list[int]] = defaultdict(list)
    for k in np.flatnonzero(useful):
        j, i = int(cand_r[k]), int(cand_p[k])
        if conflicted[k]:
            found[(j, "conflict")].append(i)
        elif (j, i) in block_reason:
            found[(j, "block")].append(i)
    ranked = sorted(found.items(), key=lambda item: (-len(item[1]), item[0]))
    losses: list[PairLoss] = []
    for rank, ((j, kind), papers) in enumerate(ranked):
        exact = len(papers) == 1 or rank < _EVALUATED_REVIEWERS
        gain = 1
        if len(papers) > 1 and exact:
            extra = (np.full(len(papers), j, np.int64), np.array(papers, dtype=np.int64))
            more = coverage_network(session, cov.tier, plan_net=net, extra_pairs=extra)
            gain = more.value - cov.value
        why = reasons if kind == "conflict" else block_reason
        losses.append(
            PairLoss(
                reviewer=session.reviewers[j].id,
                kind=kind,
                papers=tuple(session.papers[i].id for i in papers),
                reasons=tuple(why[(j, i)] for i in papers),
                gain=gain,
                exact=exact,
            )
        )
    losses.sort(key=lambda x: (-x.gain, x.reviewer, x.kind))
    return tuple(losses)
