"""Seeded benchmark instances: invented venues of four families at three sizes, in three orders.

Families (the issue's definitions):
- *loose*: reviewer caps add up to about 1.4 times the reviews wanted;
- *tight*: caps add up to exactly the reviews wanted;
- *scarce*: caps as in *loose*, but one topic in ten has far too few candidate reviewers, so
  its papers are left with gaps;
- *skewed*: caps as in *loose*, candidates shaped like real score files: paper popularity and
  reviewer activity follow Zipf-like laws, so a few reviewers have scores for most papers, a
  few papers have thousands of candidates and most have a few dozen or fewer.

Orders (`ORDERS`, `edge_order`): the same edges listed *reviewer-major* (the order the
instances are built in, and the planner's own), *paper-major* (edges grouped by the node they
enter, as a scores file lists them paper by paper), or *shuffled* (a seeded permutation).

Sizes: S = 500 papers x 300 reviewers with every pair a candidate; M = 3,000 x 2,000 with 100
candidate reviewers per paper; L = 20,000 x 15,000 with 150 candidates per paper (3 million
pairs). Every paper wants 3 reviews and must have 2. Everything is drawn from fixed seeds, so a
run on another machine solves the same instances.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from review_alloc.model import Paper, Policy, Reviewer, ScoreTable, Session

SIZES: dict[str, tuple[int, int, int | None]] = {
    "S": (500, 300, None),
    "M": (3_000, 2_000, 100),
    "L": (20_000, 15_000, 150),
}
"""Size name -> (papers, reviewers, candidates per paper; None means every pair)."""

FAMILIES = ("loose", "tight", "scarce", "skewed")
ORDERS = ("reviewer-major", "paper-major", "shuffled")
REVIEWS, MIN_REVIEWS = 3, 2
_TOPICS = 10
_SEEDS = {"loose": 11, "tight": 23, "scarce": 37, "skewed": 41}
_SKEW_MEAN = 100
"""Mean candidates per paper of the *skewed* family at size S (where the others take every pair)."""
_PAPER_ZIPF, _REVIEWER_ZIPF = 1.0, 0.9
"""Zipf exponents of paper popularity and reviewer activity in the *skewed* family."""
_SKEW_MIN = 4
"""Fewest candidates a paper of the *skewed* family is drawn with (before repeats are dropped)."""


@dataclass(frozen=True)
class Instance:
    """One venue as arrays: candidate pairs with scores, reviewer caps, paper demands."""

    name: str
    n_papers: int
    n_reviewers: int
    pair_reviewer: np.ndarray
    pair_paper: np.ndarray
    pair_score: np.ndarray
    cap: np.ndarray

    @property
    def n_pairs(self) -> int:
        """Number of candidate pairs."""
        return len(self.pair_paper)


def _caps(rng: np.random.Generator, n_reviewers: int, total: int) -> np.ndarray:
    """Caps between 1 and 12 summing to `total` (spread as evenly as chance allows)."""
    weights = rng.uniform(0.5, 1.5, n_reviewers)
    cap = np.maximum(1, np.floor(weights / weights.sum() * total)).astype(np.int64)
    cap = np.minimum(cap, 12)
    # Hand out (or take back) the rounding remainder one unit at a time, at random reviewers.
    while cap.sum() != total:
        diff = total - int(cap.sum())
        pick = rng.choice(n_reviewers, min(abs(diff), n_reviewers), replace=False)
        if diff > 0:
            pick = pick[cap[pick] < 12]
            cap[pick] += 1
        else:
            pick = pick[cap[pick] > 1]
            cap[pick] -= 1
    return cap


def make_instance(family: str, size: str) -> Instance:
    """Draw the instance of a family and size from its fixed seed."""
    n_p, n_r, per_paper = SIZES[size]
    rng = np.random.default_rng(_SEEDS[family] * 100 + list(SIZES).index(size))
    demand = REVIEWS * n_p
    total_cap = demand if family == "tight" else int(round(1.4 * demand))
    cap = _caps(rng, n_r, total_cap)
    paper_topic = rng.integers(0, _TOPICS, n_p)
    reviewer_topic = rng.integers(0, _TOPICS, n_r)
    if family == "scarce":
        # Topic 0 keeps only a handful of reviewers: its papers cannot all be covered.
        in_zero = np.flatnonzero(reviewer_topic == 0)
        reviewer_topic[in_zero[max(3, len(in_zero) // 12):]] = 1

    if family == "skewed":
        paper, reviewer = _skewed_candidates(rng, n_p, n_r, per_paper or _SKEW_MEAN)
    elif per_paper is None:
        paper = np.repeat(np.arange(n_p), n_r)
        reviewer = np.tile(np.arange(n_r), n_p)
    else:
        paper, reviewer = _candidates(rng, paper_topic, reviewer_topic, per_paper, family)
    same = paper_topic[paper] == reviewer_topic[reviewer]
    score = np.round(rng.uniform(0.0, 0.6, len(paper)) + 0.4 * same, 4)
    order = np.lexsort((paper, reviewer))
    return Instance(
        name=f"{family}-{size}",
        n_papers=n_p,
        n_reviewers=n_r,
        pair_reviewer=reviewer[order].astype(np.int64),
        pair_paper=paper[order].astype(np.int64),
        pair_score=score[order],
        cap=cap,
    )


def _candidates(
    rng: np.random.Generator,
    paper_topic: np.ndarray,
    reviewer_topic: np.ndarray,
    per_paper: int,
    family: str,
) -> tuple[np.ndarray, np.ndarray]:
    """Per paper, `per_paper` distinct reviewers: half from its topic where there are enough."""
    n_p, n_r = len(paper_topic), len(reviewer_topic)
    by_topic = [np.flatnonzero(reviewer_topic == t) for t in range(_TOPICS)]
    papers = np.repeat(np.arange(n_p), per_paper)
    chosen = np.empty((n_p, per_paper), dtype=np.int64)
    for t in range(_TOPICS):
        rows = np.flatnonzero(paper_topic == t)
        pool = by_topic[t]
        if family == "scarce" and t == 0:
            # Papers of the scarce topic only have its few reviewers as candidates.
            k = min(per_paper, len(pool))
            chosen[rows] = -1
            for r in rows:
                chosen[r, :k] = rng.choice(pool, k, replace=False)
            continue
        k_topic = min(per_paper // 2, len(pool))
        keys = rng.random((len(rows), len(pool))).argsort(axis=1)[:, :k_topic]
        chosen[rows, :k_topic] = pool[keys]
        # The rest at random; drawing a few extra and dropping repeats keeps the pairs distinct.
        for r in rows:
            have = set(chosen[r, :k_topic].tolist())
            extra: list[int] = []
            while len(extra) < per_paper - k_topic:
                for v in rng.integers(0, n_r, 2 * per_paper).tolist():
                    if v not in have:
                        have.add(v)
                        extra.append(v)
                        if len(extra) == per_paper - k_topic:
                            break
            chosen[r, k_topic:] = extra
    flat = chosen.ravel()
    keep = flat >= 0
    return papers[keep], flat[keep]


def _zipf_weights(rng: np.random.Generator, count: int, exponent: float) -> np.ndarray:
    """Weights rank**-exponent, summing to 1, handed to the items in a random order."""
    weights = np.arange(1, count + 1, dtype=np.float64) ** -exponent
    return rng.permutation(weights / weights.sum())


def _skewed_candidates(
    rng: np.random.Generator, n_p: int, n_r: int, mean: int
) -> tuple[np.ndarray, np.ndarray]:
    """Candidate pairs whose paper and reviewer degrees follow Zipf-like laws (about `mean`
    candidates per paper on average)."""
    popularity = _zipf_weights(rng, n_p, _PAPER_ZIPF)
    activity = _zipf_weights(rng, n_r, _REVIEWER_ZIPF)
    degree = np.clip(np.round(popularity * mean * n_p), _SKEW_MIN, n_r // 2).astype(np.int64)
    # Draw a third more than wanted per paper from the activity law and drop repeated pairs:
    # the most active reviewers come up for nearly every paper, as in real score files.
    draws = np.repeat(np.arange(n_p), np.ceil(degree * 4 / 3).astype(np.int64))
    picked = rng.choice(n_r, size=len(draws), p=activity)
    keys = np.unique(draws * n_r + picked)
    paper, reviewer = keys // n_r, keys % n_r
    # Keep at most `degree` candidates per paper (its first ones in a random order).
    order = np.lexsort((rng.random(len(keys)), paper))
    paper, reviewer = paper[order], reviewer[order]
    first = np.searchsorted(paper, np.arange(n_p))
    rank = np.arange(len(paper)) - first[paper]
    keep = rank < degree[paper]
    return paper[keep], reviewer[keep]


def edge_order(tails: np.ndarray, heads: np.ndarray, order: str, seed: int = 7) -> np.ndarray:
    """The permutation listing the edges in `order` (one of `ORDERS`); edges come built
    reviewer-major, so that order is the identity."""
    if order == "reviewer-major":
        return np.arange(len(tails))
    if order == "paper-major":
        # Grouped by the node entered, in the order built within a group: pair edges come
        # paper by paper, reviewers in order within a paper.
        return np.argsort(heads, kind="stable")
    if order == "shuffled":
        return np.random.default_rng(seed).permutation(len(tails))
    raise ValueError(f"unknown order {order!r}; choose from {', '.join(ORDERS)}")


def max_flow_arrays(
    inst: Instance,
) -> tuple[int, np.ndarray, np.ndarray, np.ndarray, int, int]:
    """Source -> reviewer (cap) -> paper (1) -> sink (reviews): (n, tails, heads, caps, s, t)."""
    n_r, n_p = inst.n_reviewers, inst.n_papers
    source, sink = 0, 1 + n_r + n_p
    tails = np.concatenate(
        [np.zeros(n_r, np.int64), 1 + inst.pair_reviewer, 1 + n_r + np.arange(n_p)]
    )
    heads = np.concatenate(
        [1 + np.arange(n_r), 1 + n_r + inst.pair_paper, np.full(n_p, sink, np.int64)]
    )
    caps = np.concatenate(
        [inst.cap, np.ones(inst.n_pairs, np.int64), np.full(n_p, REVIEWS, np.int64)]
    )
    return sink + 1, tails, heads, caps, source, sink


def make_session(inst: Instance, withdrawn: np.ndarray | None = None) -> Session:
    """The instance as a Session (scored pairs only are candidates; no inferred conflicts)."""
    gone = set() if withdrawn is None else set(withdrawn.tolist())
    papers = [Paper(id=f"P{i:05d}") for i in range(inst.n_papers)]
    reviewers = [
        Reviewer(id=f"R{j:05d}", cap=int(c), withdrawn=j in gone)
        for j, c in enumerate(inst.cap.tolist())
    ]
    return Session(
        name=inst.name,
        policy=Policy(reviews=REVIEWS, min_reviews=MIN_REVIEWS, cap=6, unscored="exclude"),
        papers=papers,
        reviewers=reviewers,
        scores=ScoreTable.from_arrays(inst.pair_reviewer, inst.pair_paper, inst.pair_score),
    )


def withdrawal(inst: Instance, share: float = 0.01, seed: int = 5) -> np.ndarray:
    """Indices of the reviewers who withdraw (a fixed `share` of them, from a fixed seed)."""
    rng = np.random.default_rng(seed)
    count = max(1, int(round(share * inst.n_reviewers)))
    return np.sort(rng.choice(inst.n_reviewers, count, replace=False))


def replan_case(inst: Instance, plan: Callable[[Session], Any], fresh: Any) -> tuple[Any, Session]:
    """A re-plan as the app makes it: (the earlier re-plan's outcome, the session to re-plan).

    The earlier re-plan followed one withdrawal and kept the pairs of `fresh` (an outcome of
    `plan` on the whole instance), so the tier keeping earlier pairs is on in both; the session
    to re-plan has 1 % of the reviewers withdrawn as well and holds the earlier re-plan's plan.
    """
    gone = withdrawal(inst)
    first_gone = np.setdiff1d(np.arange(inst.n_reviewers), gone)[:1]
    earlier = plan(make_session(inst, withdrawn=first_gone).model_copy(update={"plan": fresh.plan}))
    after = make_session(inst, withdrawn=np.union1d(first_gone, gone)).model_copy(
        update={"plan": earlier.plan}
    )
    return earlier, after
