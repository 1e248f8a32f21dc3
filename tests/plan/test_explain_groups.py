"""Shortfall groups: hand-built cases with known numbers, and seeded random differential checks."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_flow

from review_alloc.flow import max_flow
from review_alloc.model import (
    Conflict,
    ConflictRules,
    PairRule,
    Paper,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.plan import find_gaps, make_plan
from review_alloc.plan.explain import coverage_network, shortfall_groups
from tests.plan.test_planner import random_session, reference_instance

NO_INFERENCE = ConflictRules(author_email=False, institution=False, email_domain=False)


def topic_session(
    topics: dict[str, tuple[int, int, int]],
    *,
    reviews: int = 3,
    min_reviews: int = 2,
    policy_cap: int = 6,
    conflicts: list[tuple[str, str]] = (),
    blocks: list[tuple[str, str]] = (),
    pins: list[tuple[str, str]] = (),
    extra_scores: list[tuple[str, str]] = (),
    unscored_in_topic: set[tuple[str, str]] = frozenset(),
) -> Session:
    """Invented venue: per topic (papers, reviewers, cap); only same-topic pairs are scored."""
    papers: list[Paper] = []
    reviewers: list[Reviewer] = []
    for topic, (n_papers, n_reviewers, cap) in topics.items():
        tag = topic.split()[0][:3].upper()
        papers += [Paper(id=f"{tag}-P{i + 1}", topics=[topic]) for i in range(n_papers)]
        reviewers += [
            Reviewer(id=f"{tag}-R{j + 1}", topics=[topic], cap=cap) for j in range(n_reviewers)
        ]
    pid = {p.id: i for i, p in enumerate(papers)}
    rid = {r.id: j for j, r in enumerate(reviewers)}
    rows = [
        (j, i)
        for j, r in enumerate(reviewers)
        for i, p in enumerate(papers)
        if set(r.topics) & set(p.topics) and (r.id, p.id) not in unscored_in_topic
    ]
    rows += [(rid[r], pid[p]) for r, p in extra_scores]
    rng = np.random.default_rng(7)
    values = np.round(rng.uniform(0.3, 1.0, size=len(rows)), 2)
    return Session(
        name="invented venue",
        policy=Policy(
            reviews=reviews,
            min_reviews=min_reviews,
            cap=policy_cap,
            unscored="exclude",
            conflict_rules=NO_INFERENCE,
        ),
        papers=papers,
        reviewers=reviewers,
        conflicts=[Conflict(reviewer=r, paper=p) for r, p in conflicts],
        blocks=[PairRule(reviewer=r, paper=p) for r, p in blocks],
        pins=[PairRule(reviewer=r, paper=p) for r, p in pins],
        scores=ScoreTable.from_arrays(
            np.array([j for j, _ in rows], dtype=np.int32),
            np.array([i for _, i in rows], dtype=np.int32),
            values,
        ),
    )


def test_eight_papers_three_reviewers_of_cap_four() -> None:
    session = topic_session({"quantum sensing": (8, 3, 4), "soil chemistry": (10, 8, 6)})
    cov = coverage_network(session, "reviews")
    groups = shortfall_groups(cov)
    assert len(groups) == 1
    g = groups[0]
    assert g.papers == tuple(f"QUA-P{i}" for i in range(1, 9))
    assert g.reviewers == ("QUA-R1", "QUA-R2", "QUA-R3")
    assert (g.needed, g.available, g.shortfall) == (24, 12, 12)
    assert g.topics == ("quantum sensing",)
    assert g.cause.startswith("few eligible reviewers: only 3 reviewers")
    assert cov.shortfall == 12

    required = shortfall_groups(coverage_network(session, "min_reviews"))
    assert [(r.needed, r.available, r.shortfall) for r in required] == [(16, 12, 4)]


def test_two_independent_groups_add_up() -> None:
    session = topic_session(
        {"quantum sensing": (8, 3, 4), "tidal energy": (5, 2, 3), "soil chemistry": (6, 6, 6)}
    )
    cov = coverage_network(session, "reviews")
    groups = shortfall_groups(cov)
    assert [(g.topics, g.needed, g.available, g.shortfall) for g in groups] == [
        (("quantum sensing",), 24, 12, 12),
        (("tidal energy",), 15, 6, 9),
    ]
    assert sum(g.shortfall for g in groups) == cov.shortfall == 21


def test_conflicts_are_counted_and_weighed() -> None:
    # Two papers with three eligible reviewers each, but a declared conflict removes one.
    session = topic_session(
        {"glacier acoustics": (2, 3, 5), "soil chemistry": (4, 4, 6)},
        conflicts=[("GLA-R1", "GLA-P1")],
    )
    g = shortfall_groups(coverage_network(session, "reviews"))[0]
    assert (g.papers, g.needed, g.available, g.shortfall) == (("GLA-P1",), 3, 2, 1)
    assert g.factors["conflicted_pairs"] == 1
    assert g.factors["gain_if_conflicts_allowed"] == 1
    assert g.cause.startswith("conflicts remove the candidates")
    assert "too few eligible reviewers per paper" in g.cause


def test_unscored_pairs_rule_is_counted() -> None:
    session = topic_session(
        {"glacier acoustics": (2, 3, 5), "soil chemistry": (4, 4, 6)},
        unscored_in_topic={("GLA-R2", "GLA-P2"), ("GLA-R3", "GLA-P2")},
    )
    g = shortfall_groups(coverage_network(session, "reviews"))[0]
    assert (g.papers, g.shortfall) == (("GLA-P2",), 2)
    assert g.factors["unscored_topic_pairs"] == 2
    assert g.factors["gain_if_unscored_allowed"] == 2
    assert g.cause.startswith("the unscored-pairs rule remove")


def test_blocks_are_counted() -> None:
    session = topic_session(
        {"glacier acoustics": (1, 3, 5), "soil chemistry": (4, 4, 6)},
        blocks=[("GLA-R1", "GLA-P1")],
    )
    g = shortfall_groups(coverage_network(session, "reviews"))[0]
    assert (g.shortfall, g.factors["blocked_pairs"], g.factors["gain_if_blocks_lifted"]) == (
        1,
        1,
        1,
    )


def test_caps_exhausted_by_the_group_itself() -> None:
    # One generous reviewer can give each paper only one review; the two others are full.
    session = topic_session({"tidal energy": (2, 3, 1), "soil chemistry": (3, 3, 6)})
    reviewers = [session.reviewers[0].model_copy(update={"cap": 10}), *session.reviewers[1:]]
    session = session.model_copy(update={"reviewers": reviewers})
    g = shortfall_groups(coverage_network(session, "reviews"))[0]
    # needed 6; TID-R1 gives one review to each paper (2), TID-R2 and TID-R3 one each (2).
    assert (g.needed, g.available, g.shortfall) == (6, 4, 2)
    assert g.saturated_reviewers == ("TID-R2", "TID-R3")
    assert g.cause.startswith("caps exhausted")


def test_pins_outside_the_group_reduce_what_it_can_get() -> None:
    # TID-R1 is pinned to a soil-chemistry paper, which leaves one of its two places.
    session = topic_session(
        {"tidal energy": (3, 2, 2), "soil chemistry": (1, 3, 6)},
        reviews=2,
        min_reviews=1,
        extra_scores=[("TID-R1", "SOI-P1")],
        pins=[("TID-R1", "SOI-P1")],
    )
    cov = coverage_network(session, "reviews")
    g = shortfall_groups(cov)[0]
    assert g.papers == ("TID-P1", "TID-P2", "TID-P3")
    assert (g.needed, g.available, g.shortfall) == (6, 3, 3)
    assert cov.shortfall == 3


def test_lemon_circulation_cut_counts_lower_bounds() -> None:
    # LEMON graph library, test/circulation_test.cc: an exact 0->5 flow of value F is feasible
    # iff 7 <= F <= 13. The cut of the sink-reaching nodes must count upper bounds forwards and
    # lower bounds backwards, as the shortfall groups do for pins.
    arcs = [(0, 1, 2, 10), (0, 2, 2, 6), (1, 3, 4, 7), (1, 4, 0, 5), (2, 4, 1, 3), (3, 5, 3, 8)]
    arcs.append((4, 5, 3, 7))
    tails = np.array([a[0] for a in arcs])
    heads = np.array([a[1] for a in arcs])
    lower = np.array([a[2] for a in arcs])
    upper = np.array([a[3] for a in arcs])
    for source, sink, expected in ((0, 5, 13), (5, 0, -7)):
        result = max_flow(6, tails, heads, upper, source, sink, lower=lower)
        assert result.value == expected
        sink_side = result.sink_side
        assert not sink_side[source]
        out = ~sink_side[tails] & sink_side[heads]
        back = sink_side[tails] & ~sink_side[heads]
        assert int(upper[out].sum() - lower[back].sum()) == expected


def _scipy_shortfall(session: Session, tier: str) -> int:
    """Total demand minus scipy's maximum flow on the bipartite network (no pins here)."""
    inst = reference_instance(session)
    n_r, n_p = len(inst.cap), len(inst.reviews)
    demand = inst.min_reviews if tier == "min_reviews" else inst.reviews
    s, t = n_r + n_p, n_r + n_p + 1
    rows = [s] * n_r + [int(j) for j in inst.pairs[:, 0]] + [n_r + i for i in range(n_p)]
    cols = list(range(n_r)) + [n_r + int(i) for i in inst.pairs[:, 1]] + [t] * n_p
    caps = [int(c) for c in inst.cap] + [1] * len(inst.pairs) + [int(d) for d in demand]
    graph = csr_matrix(
        (np.array(caps, dtype=np.int32), (rows, cols)), shape=(n_r + n_p + 2, n_r + n_p + 2)
    )
    return int(demand.sum()) - maximum_flow(graph, s, t).flow_value


@pytest.mark.parametrize("seed", range(40))
@pytest.mark.parametrize("tier", ["min_reviews", "reviews"])
def test_group_shortfalls_add_up_to_scipy_shortfall(seed: int, tier: str) -> None:
    session = random_session(500 + seed, unscored="exclude" if seed % 2 else "zero")
    cov = coverage_network(session, tier)
    groups = shortfall_groups(cov)
    # Reference: scipy.sparse.csgraph.maximum_flow on source -> reviewer -> paper -> sink.
    total = _scipy_shortfall(session, tier)
    assert sum(g.shortfall for g in groups) == total == cov.shortfall
    assert all(g.shortfall > 0 and g.needed - g.available == g.shortfall for g in groups)
    seen = [p for g in groups for p in g.papers]
    assert len(seen) == len(set(seen))

    # Every optimal plan misses exactly the group's shortfall inside each group.
    plan = make_plan(session).plan
    gaps = find_gaps(session, plan)
    key = "missing_required" if tier == "min_reviews" else "missing"
    for g in groups:
        assert sum(getattr(x, key) for x in gaps if x.paper in g.papers) == g.shortfall
    assert {x.paper for x in gaps if getattr(x, key) > 0} <= set(seen)


@pytest.mark.parametrize("seed", range(15))
def test_group_shortfalls_add_up_with_pins(seed: int) -> None:
    session = random_session(700 + seed, unscored="exclude", pins=True)
    plan = make_plan(session).plan
    for tier, got in (
        ("min_reviews", plan.figures.required_coverage),
        ("reviews", plan.figures.coverage),
    ):
        cov = coverage_network(session, tier)
        # The plan's coverage is the tier's maximum (checked against HiGHS in test_planner).
        assert cov.value == got
        demand = plan.figures.required_demand if tier == "min_reviews" else plan.figures.demand
        assert sum(g.shortfall for g in shortfall_groups(cov)) == demand - got
