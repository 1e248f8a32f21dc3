"""Explanations under the chair rules: the coverage network states the institution limit as the
planner does, and its figures agree with HiGHS integer programs written from the README alone."""

from __future__ import annotations

import pytest

from review_alloc.model import Session
from review_alloc.plan import find_gaps, make_plan
from review_alloc.plan.explain import CoverageNetwork, coverage_network
from review_alloc.plan.explanation import explain, report
from review_alloc.plan.whatif import apply_cap_fix, apply_recruit_fix
from tests.plan.constraint_reference import lexicographic_rules_optimum, rule_instance
from tests.plan.test_constraints_reference import rules_session


def _no_limit(session: Session) -> Session:
    return session.model_copy(
        update={"policy": session.policy.model_copy(update={"max_per_institution": None})}
    )


def assert_explanation_holds(session: Session) -> None:
    """Coverage figures against HiGHS, groups adding up, the report accepting the plan."""
    # Reference: HiGHS via scipy.optimize.milp, tier by tier (tests/plan/constraint_reference).
    ref = lexicographic_rules_optimum(rule_instance(session))
    if ref is None:
        return
    found = explain(session)
    outcome = make_plan(session)
    plan = outcome.plan
    if found.exact["min_reviews"]:
        assert found.best["min_reviews"] == pytest.approx(ref["required"])
    else:
        assert found.best["min_reviews"] >= ref["required"] - 1e-9
    if found.exact["reviews"]:
        assert found.best["reviews"] == pytest.approx(ref["coverage"])
    else:
        assert found.best["reviews"] >= ref["coverage"] - 1e-9
    for tier in ("min_reviews", "reviews"):
        groups = found.groups_of(tier)
        assert sum(g.shortfall for g in groups) == found.shortfall[tier]
        assert all(g.shortfall == g.needed - g.available > 0 for g in groups)
    # The report refuses a plan whose coverage disagrees with an exact figure: it must accept.
    out = report(found, plan)
    assert out["coverage"]["min_reviews"]["planned"] == plan.figures.required_coverage
    if found.exact["reviews"]:
        # Every optimal plan misses exactly each group's shortfall inside the group.
        gaps = find_gaps(session, plan)
        for g in found.groups_of("reviews"):
            assert sum(x.missing for x in gaps if x.paper in g.papers) == g.shortfall


@pytest.mark.parametrize("seed", range(20))
def test_institution_limit_explanations_match_highs(seed: int) -> None:
    session = rules_session(900 + seed, (8, 10), max_per_institution=1, min_reviews=2)
    assert_explanation_holds(session)


@pytest.mark.parametrize("seed", range(10))
def test_limit_with_shared_topics_and_bottleneck_explanations_match_highs(seed: int) -> None:
    session = rules_session(
        950 + seed,
        (8, 10),
        max_per_institution=1,
        min_reviews=2,
        require_shared_topic=True,
        bottleneck=seed % 2 == 0,
    )
    assert_explanation_holds(session)


@pytest.mark.parametrize("seed", range(10))
def test_limit_with_seniors_explanations_hold(seed: int) -> None:
    session = rules_session(980 + seed, (8, 10), max_per_institution=1, min_reviews=2, senior_min=1)
    assert_explanation_holds(session)


def test_the_limit_changes_the_figures_on_some_sessions() -> None:
    # Without the groups in the network, the explanation would report the unlimited figure
    # (issue 21: "plan 71, maximum flow 74"); these sessions tell the two apart.
    differs = 0
    for seed in range(20):
        session = rules_session(900 + seed, (8, 10), max_per_institution=1, min_reviews=2)
        limited = coverage_network(session, "min_reviews").value
        free = coverage_network(_no_limit(session), "min_reviews").value
        assert limited <= free
        differs += limited < free
    assert differs > 0


@pytest.mark.parametrize("seed", range(10))
def test_the_cap_raise_under_the_limit_reaches_what_it_claims(seed: int) -> None:
    session = rules_session(1000 + seed, (6, 10), max_per_institution=1)
    found = explain(session)
    fix = found.caps
    if not fix.raises:
        return
    changed = apply_cap_fix(session, fix)
    after = make_plan(changed).plan
    # The re-plan of the changed copy reaches the coverage the fix promises, under the limit.
    assert after.figures.coverage == fix.coverage_after


def _no_seniors(session: Session) -> Session:
    papers = [p.model_copy(update={"senior_min": None}) for p in session.papers]
    policy = session.policy.model_copy(update={"senior_min": 0})
    return session.model_copy(update={"papers": papers, "policy": policy})


def _coverage_with(cov: CoverageNetwork, topics: list[str], counts: tuple[int, ...]) -> int:
    """Reference: networkx's maximum flow on the coverage network with `counts` recruits per
    topic, each able to take the policy's cap and one review per paper of its topic."""
    import networkx as nx

    net = cov.plan_net
    graph = nx.DiGraph()
    arcs = zip(cov.tails.tolist(), cov.heads.tolist(), cov.capacities.tolist(), strict=True)
    for t, h, c in arcs:
        if graph.has_edge(t, h):
            graph[t][h]["capacity"] += c
        else:
            graph.add_edge(t, h, capacity=c)
    cap = cov.session.policy.cap
    for k, (topic, n) in enumerate(zip(topics, counts, strict=True)):
        node = ("recruits", k)
        graph.add_edge(0, node, capacity=n * cap)
        for i, paper in enumerate(cov.session.papers):
            if topic in paper.topics:
                graph.add_edge(node, 1 + net.n_reviewers + i, capacity=n)
    return int(nx.maximum_flow_value(graph, 0, cov.sink))


@pytest.mark.parametrize("seed", range(8))
def test_the_fewest_recruits_under_the_limit_are_the_fewest(seed: int) -> None:
    from itertools import product

    from review_alloc.plan.fixes import recruit_fix

    session = rules_session(2000 + seed, (6, 10), max_per_institution=1, min_reviews=2)
    session = _no_seniors(session)
    cov = coverage_network(session, "reviews")
    if cov.lower.any() or not len(cov.group_paper):
        pytest.skip("pins (lower bounds) or no crowded group: not the case under test")
    fix = recruit_fix(cov)
    assert not fix.note
    topics = sorted({t for p in session.papers for t in p.topics})
    counts = tuple(next((n.recruits for n in fix.needs if n.topic == t), 0) for t in topics)
    # The fix reaches what it claims, and a re-plan of the changed session reaches it too.
    assert _coverage_with(cov, topics, counts) == fix.coverage_after
    changed = make_plan(apply_recruit_fix(session, fix)).plan
    assert changed.figures.coverage == fix.coverage_after
    # No smaller number of recruits, however spread over the topics, reaches it.
    if fix.total:
        fewer = fix.total - 1
        for spread in product(range(fewer + 1), repeat=len(topics)):
            if sum(spread) == fewer:
                assert _coverage_with(cov, topics, spread) < fix.coverage_after
