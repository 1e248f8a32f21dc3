"""What the screens show agrees with the planner's own reports of the same plan."""

from __future__ import annotations

import pytest

from review_alloc.model import Session
from review_alloc.plan import conflict_pairs, find_gaps, load_issues, make_plan
from review_alloc.samples import workshop
from review_alloc.workspace.facts import Facts


@pytest.fixture(scope="module")
def tight() -> Session:
    """The workshop with caps too low to cover it, planned."""
    s = workshop()
    s = s.model_copy(
        update={"reviewers": [r.model_copy(update={"cap": 4, "floor": 0}) for r in s.reviewers]}
    )
    return s.model_copy(update={"plan": make_plan(s).plan})


def test_paper_states_match_the_gap_report(tight: Session) -> None:
    facts = Facts.of(tight)
    gaps = {g.paper: g for g in find_gaps(tight, tight.plan)}
    assert gaps
    for i, p in enumerate(tight.papers):
        state = facts.paper_status(i)
        if p.id not in gaps:
            assert state == "covered"
        elif gaps[p.id].missing_required:
            assert state == f"BELOW MIN {gaps[p.id].missing_required}"
        else:
            assert state == f"short {gaps[p.id].missing}"


def test_reviewer_states_and_load_bands(tight: Session) -> None:
    facts = Facts.of(tight)
    over, under = load_issues(tight, tight.plan)
    assert not over
    below = {u.reviewer for u in under}
    for j, r in enumerate(tight.reviewers):
        assert facts.reviewer_status(j).startswith("below floor") == (r.id in below)
    bands = dict(facts.load_bands())
    assert sum(bands.values()) == len(tight.reviewers)
    loads = [sum(a.reviewer == r.id for a in tight.plan.assignments) for r in tight.reviewers]
    assert bands["at cap"] == sum(load == 4 for load in loads)


def test_pair_reasons(tight: Session) -> None:
    facts = Facts.of(tight)
    reasons = conflict_pairs(tight).reason_of()
    assigned = {(a.reviewer, a.paper) for a in tight.plan.assignments}
    for i in range(len(tight.papers)):
        for c in facts.candidates_of_paper(i, limit=30):
            pair = (tight.reviewers[c.reviewer].id, tight.papers[c.paper].id)
            if pair in assigned:
                assert c.status == "assigned"
            elif (c.reviewer, c.paper) in reasons:
                assert c.status == f"conflict: {reasons[(c.reviewer, c.paper)]}"
                assert not c.usable
            elif facts.loads[c.reviewer] >= 4:
                assert c.status == "cap full (4/4)"
            # Scores shown are the table's own.
            assert c.score == tight.scores.get(c.reviewer, c.paper)


def test_charts_count_every_assignment(tight: Session) -> None:
    facts = Facts.of(tight)
    assert sum(n for _, n in facts.score_histogram()) == len(tight.plan.assignments)
    placed = sum(p for _, p, _ in facts.topic_coverage())
    # A paper with two topics counts in both, so the topic sums bound the coverage from above.
    assert placed >= tight.plan.figures.coverage
    single = all(len(p.topics) <= 1 for p in tight.papers)
    assert not single or placed == tight.plan.figures.coverage


def test_facts_reuse_conflicts_only_when_people_are_unchanged(tight: Session) -> None:
    first = Facts.of(tight)
    pinned = tight.model_copy(update={"pins": []})
    assert Facts.of(pinned, first).conflict_reason is first.conflict_reason
    moved = tight.model_copy(update={"conflicts": []})
    again = Facts.of(moved, first)
    assert again.conflict_reason == conflict_pairs(moved).reason_of()


def test_pair_list_follows_every_rule_of_the_planner() -> None:
    s = workshop()
    s = s.model_copy(
        update={"policy": s.policy.model_copy(update={"require_shared_topic": True})}
    )
    s = s.model_copy(update={"plan": make_plan(s).plan})
    facts = Facts.of(s)
    reasons = conflict_pairs(s).reason_of()
    assigned = {(a.reviewer, a.paper) for a in s.plan.assignments}
    seen = 0
    for i, p in enumerate(s.papers):
        for c in facts.candidates_of_paper(i, limit=40):
            r = s.reviewers[c.reviewer]
            shared = {t.casefold() for t in r.topics} & {t.casefold() for t in p.topics}
            if (r.id, p.id) in assigned:
                # The plan keeps the rule, so every assigned pair shares a topic.
                assert shared and c.status in ("assigned", "pinned")
            elif (c.reviewer, i) in reasons or r.withdrawn or p.withdrawn:
                assert not c.usable
            elif not shared:
                seen += 1
                assert c.status == "no shared topic"
                assert not c.usable
    assert seen


def test_facts_reuse_the_rules_across_a_pin() -> None:
    first = Facts.of(workshop())
    pinned = first.session.model_copy(update={"pins": []})
    again = Facts.of(pinned, first)
    assert again.rules is not first.rules
    assert again.rules.sorted_scores()[0] is first.rules.sorted_scores()[0]


@pytest.mark.parametrize("seed", range(25))
def test_the_apps_pair_status_is_the_rule_modules_on_every_pair(seed: int) -> None:
    # Every rule on (tests.plan.test_rules.every_rule_session); the reference for which pairs a
    # rule forbids is the project's independent checker (`plan.checker.pair_flags`).
    from review_alloc.plan import PlanInputError
    from review_alloc.plan.checker import pair_flags
    from review_alloc.plan.rules import PairRules
    from tests.plan.test_rules import every_pair, every_rule_session, valid_pins

    session = valid_pins(every_rule_session(seed, pins=0), 2, seed)
    try:
        session = session.model_copy(update={"plan": make_plan(session).plan})
    except PlanInputError:
        return  # a hard senior rule no plan can meet: no plan to show
    facts = Facts.of(session)
    rules = PairRules(session)
    reviewer, paper = every_pair(session)
    _, score = rules.scores_of(reviewer, paper)
    flagged = pair_flags(session, reviewer, paper, score).any()
    pinned = {(p.reviewer, p.paper) for p in session.pins}
    for k, (j, i) in enumerate(zip(reviewer.tolist(), paper.tolist(), strict=True)):
        status = facts.pair_status(j, i)
        pair = (session.reviewers[j].id, session.papers[i].id)
        if status in ("assigned", "pinned"):
            assert not flagged[k] or pair in pinned
        elif flagged[k]:
            # The app says exactly what the rule module says, never "eligible, not chosen".
            assert status == rules.why_not(j, i)
        else:
            assert rules.why_not(j, i) is None
            assert not status.startswith(("conflict", "blocked", "withdrawn", "below min"))


def test_leads_follow_the_plan(tight: Session) -> None:
    facts = Facts.of(tight)
    pid, rid = tight.paper_index(), tight.reviewer_index()
    leads = {a.paper: a.reviewer for a in tight.plan.assignments if a.lead}
    assert leads
    for i, p in enumerate(tight.papers):
        lead = facts.lead_of_paper[i]
        assert (None if lead is None else tight.reviewers[lead].id) == leads.get(p.id)
    for j, r in enumerate(tight.reviewers):
        assert [tight.papers[i].id for i in facts.led_by_reviewer[j]] == sorted(
            (p for p, who in leads.items() if who == r.id), key=pid.__getitem__
        )
    paper, reviewer = next(iter(leads.items()))
    on_paper = facts.candidates_of_paper(pid[paper])
    assert [c.reviewer for c in on_paper if c.lead] == [rid[reviewer]]
    assert facts.leads(rid[reviewer], pid[paper])
