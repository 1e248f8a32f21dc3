"""The one rules module (plan.rules) against the independent checker, the planner and the app.

The reference for "may this pair be used" is the project's own independent checker
(`plan.checker.pair_flags`), which reads every rule from the session's rows without importing
`plan.rules`. The planner's optimality on these rules is checked against HiGHS elsewhere
(test_constraints_reference.py); here the question is only whether the rules agree.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from review_alloc.model import (
    Assignment,
    Conflict,
    PairRule,
    Paper,
    Plan,
    Policy,
    Reviewer,
    ScoreTable,
    Session,
)
from review_alloc.plan import PlanInputError, make_plan
from review_alloc.plan.checker import _hard_rule_problems, pair_flags
from review_alloc.plan.figures import assignment_indices, loads_and_counts, plan_figures
from review_alloc.plan.rules import PAIR_RULES, PIN_REFUSED, PairRules, Rule, candidate_pairs
from review_alloc.workspace.facts import Facts
from tests.plan.test_constraints_reference import NO_INFERENCE

TOPICS = ["alpha", "Beta", "gamma  rays", "delta"]
LABS = [("Lab Oster", "oster.example"), ("Lab Wrenmoor", "wren.example"), ("Lab Calvale", "")]


def _topics(rng: np.random.Generator) -> list[str]:
    picked = rng.choice(TOPICS, size=int(rng.integers(0, 3)), replace=False).tolist()
    # Case and spacing vary between the two sides: the shared-topic rule folds both.
    return [t.upper() if rng.random() < 0.3 else t.replace("  ", " ") for t in picked]


def every_rule_session(seed: int, *, pins: int = 2, **policy: object) -> Session:
    """A seeded session with every rule on: declared and inferred conflicts (author e-mail,
    institution, e-mail domain), blocks, withdrawals, pins, unscored pairs, a minimum score,
    shared topics, the institution limit and a senior rule."""
    rng = np.random.default_rng(seed)
    n_r, n_p = int(rng.integers(4, 10)), int(rng.integers(3, 9))
    reviewers = []
    for j in range(n_r):
        lab, domain = LABS[int(rng.integers(len(LABS)))]
        reviewers.append(
            Reviewer(
                id=f"r{j}",
                email=f"r{j}@{domain or 'mailbox.example'}" if rng.random() < 0.8 else "",
                institution=lab if rng.random() < 0.85 else "",
                topics=_topics(rng),
                senior=bool(rng.random() < 0.5),
                cap=int(rng.integers(1, 5)),
                withdrawn=bool(rng.random() < 0.1),
            )
        )
    papers = []
    for i in range(n_p):
        authors = []
        if rng.random() < 0.3:
            authors.append(f"r{int(rng.integers(n_r))}@{LABS[int(rng.integers(2))][1]}")
        if rng.random() < 0.2:
            authors.append(f"someone{i}@{LABS[int(rng.integers(2))][1]}")
        papers.append(
            Paper(
                id=f"p{i}",
                topics=_topics(rng),
                authors=authors,
                institutions=[LABS[2][0].lower()] if rng.random() < 0.15 else [],
                senior_min=int(rng.integers(0, 3)) if rng.random() < 0.3 else None,
                withdrawn=bool(rng.random() < 0.1),
            )
        )
    pairs = [(j, i) for j in range(n_r) for i in range(n_p)]
    rng.shuffle(pairs)
    k = len(pairs)
    scored = sorted(pairs[: int(k * 0.75)])
    declared = pairs[int(k * 0.75) : int(k * 0.82)]
    blocked = pairs[int(k * 0.82) : int(k * 0.88)]
    pinned = pairs[int(k * 0.88) : int(k * 0.88) + pins] if pins else []
    base = Policy(
        reviews=3,
        min_reviews=1,
        cap=3,
        unscored="exclude" if seed % 2 else "zero",
        min_score=0.3,
        require_shared_topic=True,
        max_per_institution=1 + seed % 2,
        senior_min=1,
        senior_hard=seed % 3 == 0,
    )
    return Session(
        name=f"every rule {seed}",
        policy=base.model_copy(update=policy),
        papers=papers,
        reviewers=reviewers,
        conflicts=[Conflict(reviewer=f"r{j}", paper=f"p{i}") for j, i in declared],
        blocks=[PairRule(reviewer=f"r{j}", paper=f"p{i}") for j, i in blocked],
        pins=[PairRule(reviewer=f"r{j}", paper=f"p{i}") for j, i in pinned],
        scores=ScoreTable.from_arrays(
            np.array([j for j, _ in scored], dtype=np.int32),
            np.array([i for _, i in scored], dtype=np.int32),
            np.round(rng.uniform(0, 1, size=len(scored)), 2),
        ),
    )


def every_pair(session: Session) -> tuple[np.ndarray, np.ndarray]:
    """Index arrays of every (reviewer, paper) pair of the session."""
    grid = np.array(
        list(itertools.product(range(len(session.reviewers)), range(len(session.papers))))
    )
    return grid[:, 0], grid[:, 1]


def valid_pins(session: Session, count: int, seed: int) -> Session:
    """The session with up to `count` pins that the rules accept together."""
    rules = PairRules(session.model_copy(update={"pins": []}))
    rng = np.random.default_rng(seed)
    chosen: list[PairRule] = []
    reviewer, paper = every_pair(session)
    for k in rng.permutation(len(reviewer)).tolist():
        if len(chosen) == count:
            break
        pin = PairRule(
            reviewer=session.reviewers[reviewer[k]].id, paper=session.papers[paper[k]].id
        )
        if rules.why_not(int(reviewer[k]), int(paper[k])) is None and not rules.pin_problems(
            [*chosen, pin]
        ):
            chosen.append(pin)
    return session.model_copy(update={"pins": chosen})


SEEDS = range(40)


@pytest.mark.parametrize("seed", SEEDS)
def test_forbidden_pairs_are_exactly_those_the_checker_flags(seed: int) -> None:
    session = every_rule_session(seed)
    rules = PairRules(session)
    reviewer, paper = every_pair(session)
    # Reference: the project's independent checker, which derives every rule from the rows.
    _, score = rules.scores_of(reviewer, paper)
    flags = pair_flags(session, reviewer, paper, score)
    forbidden = rules.forbidden(reviewer, paper)
    assert np.array_equal(forbidden, flags.any())
    # With the scores given (only the pairs of active entities are looked up): the same.
    assert np.array_equal(rules.forbidden(reviewer, paper, score), flags.any())
    # Rule by rule: the first rule broken is one the checker flags.
    per_rule = {
        Rule.CONFLICT: flags.conflicted,
        Rule.BLOCKED: flags.blocked,
        Rule.WITHDRAWN: flags.gone_reviewer | flags.gone_paper,
        Rule.UNSCORED: flags.unscored,
        Rule.BELOW_MIN_SCORE: flags.below_min_score,
        Rule.NO_SHARED_TOPIC: flags.no_shared_topic,
    }
    codes = rules.codes(reviewer, paper)
    for k, code in enumerate(codes.tolist()):
        if code:
            assert per_rule[PAIR_RULES[code]][k]
    # The scalar answer (the app's, per row) agrees with the whole-array one on every pair.
    for k in range(len(reviewer)):
        verdict = rules.pair_verdict(int(reviewer[k]), int(paper[k]))
        assert verdict.rule is PAIR_RULES[codes[k]]
        assert (rules.why_not(int(reviewer[k]), int(paper[k])) is None) == (not forbidden[k])


@pytest.mark.parametrize("seed", SEEDS)
def test_eligible_pairs_are_the_allowed_candidates(seed: int) -> None:
    session = every_rule_session(seed)
    rules = PairRules(session)
    reviewer, paper, score, keys, pinned = rules.eligible_pairs()
    # A pin stays in the network even where a withdrawal forbids it: the pin check refuses it
    # with its own words before any plan is made.
    bad = rules.forbidden(reviewer, paper, score)
    assert np.all(pinned[bad])
    assert bool(bad.any()) <= bool(rules.pin_problems())
    cand_r, cand_p, cand_s = candidate_pairs(session)
    code = rules.codes(cand_r, cand_p, cand_s)
    cand_pinned = np.array(
        [(int(j), int(i)) in rules.pinned_pairs() for j, i in zip(cand_r, cand_p, strict=True)],
        dtype=bool,
    )
    conflict_or_block = np.isin(
        code, [PAIR_RULES.index(Rule.CONFLICT), PAIR_RULES.index(Rule.BLOCKED)]
    )
    allowed = (code == 0) | (cand_pinned & ~conflict_or_block)
    assert np.array_equal(cand_r[allowed], reviewer)
    assert np.array_equal(cand_p[allowed], paper)
    assert np.all(np.diff(keys) > 0)
    pins = {(p.reviewer, p.paper) for p in session.pins}
    got = {
        (session.reviewers[j].id, session.papers[i].id)
        for j, i in zip(reviewer, paper, strict=True)
    }
    assert {(r, p) for r, p in pins if (r, p) in got} == {
        (session.reviewers[j].id, session.papers[i].id)
        for j, i, x in zip(reviewer, paper, pinned, strict=True)
        if x
    }


@pytest.mark.parametrize("seed", SEEDS)
def test_the_planner_uses_only_allowed_pairs_that_fit_the_plan(seed: int) -> None:
    session = valid_pins(every_rule_session(seed, pins=0), 2, seed)
    rules = PairRules(session)
    assert rules.pin_problems() == []
    try:
        plan = make_plan(session).plan
    except PlanInputError as error:
        # The only refusal left: a hard senior rule no plan can meet.
        assert "senior_hard" in str(error)
        return
    reviewer, paper, score = assignment_indices(session, plan.assignments)
    assert not rules.forbidden(reviewer, paper, score).any()
    loads, counts = loads_and_counts(session, reviewer, paper)
    planned = session.model_copy(update={"plan": plan})
    facts = Facts.of(planned)
    for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
        assert facts.pair_status(j, i) in ("assigned", "pinned")
        # Taken out of the plan, the pair fits it again under every plan rule.
        loads[j] -= 1
        counts[i] -= 1
        others = [
            x for x, y in zip(reviewer.tolist(), paper.tolist(), strict=True) if y == i and x != j
        ]
        verdict = rules.verdict(j, i, loads, counts, assigned=False, pinned=False, on_paper=others)
        assert verdict.allowed, verdict.text
        loads[j] += 1
        counts[i] += 1


def _plan_of(session: Session, rows: list[Assignment]) -> Plan:
    r, p, s = assignment_indices(session, rows)
    return Plan(assignments=rows, figures=plan_figures(session, r, p, s), checked=False, method="t")


@pytest.mark.parametrize("seed", SEEDS)
def test_plan_keep_leaves_a_plan_the_checker_accepts(seed: int) -> None:
    loose = valid_pins(
        every_rule_session(
            seed,
            pins=0,
            min_score=None,
            require_shared_topic=False,
            max_per_institution=None,
            senior_hard=False,
        ),
        2,
        seed,
    )
    plan = make_plan(loose).plan
    rng = np.random.default_rng(seed)
    reviewers = [
        r.model_copy(update={"cap": max(int(r.cap or 3) - int(rng.integers(0, 3)), 0)})
        for r in loose.reviewers
    ]
    strict = loose.model_copy(
        update={
            "reviewers": reviewers,
            "policy": loose.policy.model_copy(
                update={
                    "min_score": 0.5,
                    "require_shared_topic": True,
                    "max_per_institution": 1,
                    "reviews": 2,
                    "min_reviews": 1,
                }
            ),
        }
    )
    rules = PairRules(strict)
    reviewer, paper, score = assignment_indices(strict, plan.assignments)
    pins = rules.pinned_pairs()
    pinned = np.array([(j, i) in pins for j, i in zip(reviewer, paper, strict=True)], dtype=bool)
    keep = rules.plan_keep(reviewer, paper, score, pinned)
    rows = [a for a, ok in zip(plan.assignments, keep, strict=True) if ok]
    kept = _plan_of(strict, rows)
    r, p, s = assignment_indices(strict, rows)
    # Reference: the project's independent checker. Pins the stricter caps leave no room for,
    # and seniors a shorter plan lacks, are gaps and pin refusals, not forbidden pairs.
    problems = [
        x
        for x in _hard_rule_problems(strict, kept, r, p, s)[0]
        if "is missing" not in x and "senior reviewers" not in x
    ]
    assert problems == []
    # Nothing allowed was dropped without cause: each dropped pair is forbidden, or its
    # reviewer, paper or institution group is full among the kept pairs.
    loads, counts = loads_and_counts(strict, r, p)
    forbidden = rules.forbidden(reviewer, paper)
    for k in np.flatnonzero(~keep).tolist():
        j, i = int(reviewer[k]), int(paper[k])
        on_paper = [x for x, y in zip(r.tolist(), p.tolist(), strict=True) if y == i]
        verdict = rules.verdict(
            j, i, loads, counts, assigned=False, pinned=False, on_paper=on_paper
        )
        assert forbidden[k] or verdict.rule in (
            Rule.CAP_FULL,
            Rule.PAPER_FULL,
            Rule.INSTITUTION_LIMIT,
        ), verdict.text


def small_panel(**policy: object) -> Session:
    """Four reviewers, three proposals; every reason occurs on some pair."""
    reviewers = [
        Reviewer(id="a", institution="Lab Oster", topics=["alpha"], senior=True, cap=1),
        Reviewer(id="b", institution="Lab Oster", topics=["Alpha "], cap=2),
        Reviewer(id="c", institution="Lab Wrenmoor", topics=["beta"], cap=2),
        Reviewer(id="d", topics=["alpha"], withdrawn=True),
        Reviewer(id="e", institution="Lab Calvale", topics=["alpha"], cap=2),
    ]
    papers = [
        Paper(id="p", topics=["alpha"], reviews=2),
        Paper(id="q", topics=["beta"], reviews=1),
        Paper(id="w", topics=["alpha"], withdrawn=True),
    ]
    scores = ScoreTable.from_arrays(
        np.array([0, 1, 2, 1, 2, 4], dtype=np.int32),
        np.array([0, 0, 0, 1, 1, 1], dtype=np.int32),
        np.array([0.9, 0.6, 0.2, 0.7, 0.8, 0.9]),
    )
    base = Policy(
        reviews=2,
        min_reviews=1,
        unscored="zero",
        min_score=0.3,
        require_shared_topic=True,
        conflict_rules=NO_INFERENCE,
    )
    return Session(
        name="small panel",
        kind="panel",
        policy=base.model_copy(update=policy),
        papers=papers,
        reviewers=reviewers,
        scores=scores,
        conflicts=[Conflict(reviewer="c", paper="q", reason="recent co-author")],
        blocks=[PairRule(reviewer="b", paper="q", reason="chair's call")],
    )


def test_why_not_and_standing_name_each_reason() -> None:
    s = small_panel()
    rules = PairRules(s)
    a, b, c, d, e = range(5)
    p, q, w = range(3)
    assert rules.why_not(c, q) == "conflict: declared: recent co-author"
    assert rules.why_not(b, q) == "blocked by the chair"
    assert rules.why_not(d, p) == "withdrawn reviewer"
    assert rules.why_not(a, w) == "withdrawn proposal"
    assert rules.why_not(c, p) == "below min score (0.2 < 0.3)"
    assert rules.why_not(e, q) == "no shared topic"
    assert rules.why_not(a, q) == "below min score (0 < 0.3)"
    excluding = PairRules(
        s.model_copy(
            update={
                "policy": s.policy.model_copy(update={"unscored": "exclude", "min_score": None})
            }
        )
    )
    assert excluding.why_not(a, q) == "not eligible: unscored"
    assert rules.why_not(a, p) is None
    assert rules.why_not(b, p) is None  # "Alpha " folds to "alpha"

    # Plan rules, against a plan with `a` on p (a's cap is 1).
    loads = np.array([1, 0, 0, 0, 0])
    counts = np.array([1, 0, 0])

    def standing(j: int, i: int, **kw: object) -> str:
        base = {"assigned": False, "pinned": False, "on_paper": [a] if i == p else []}
        return rules.standing(j, i, loads, counts, **{**base, **kw})

    assert standing(a, p, assigned=True) == "assigned"
    assert standing(a, p, assigned=True, pinned=True) == "pinned"
    assert standing(e, p, pinned=True) == "pinned (plan again)"
    assert standing(e, q) == "no shared topic"
    assert standing(c, p) == "below min score (0.2 < 0.3)"
    no_minimum = PairRules(
        s.model_copy(update={"policy": s.policy.model_copy(update={"min_score": None})})
    )
    assert no_minimum.standing(e, p, loads, counts, False, False, [a]) == "unscored (counts as 0)"
    assert standing(b, p) == "eligible, not chosen"
    limited = PairRules(
        s.model_copy(update={"policy": s.policy.model_copy(update={"max_per_institution": 1})})
    )
    text = limited.standing(b, p, loads, counts, False, False, [a])
    assert text == "institution limit (1 from Lab Oster on this proposal, max 1)"
    full_cap = np.array([1, 2, 0, 0, 0])
    assert rules.standing(b, p, full_cap, counts, False, False, [a]) == "cap full (2/2)"
    assert rules.standing(b, p, loads, np.array([2, 0, 0]), False, False, [a]) == (
        "proposal already has its reviews"
    )
    seniors = PairRules(
        s.model_copy(
            update={
                "policy": s.policy.model_copy(
                    update={"senior_min": 1, "senior_hard": True, "min_score": None}
                )
            }
        )
    )
    # p wants 2 reviews and 1 senior: with junior b on it, junior e would take the senior's seat.
    assert seniors.standing(e, p, np.zeros(5, int), np.array([1, 0, 0]), False, False, [b]) == (
        "seats left are for seniors (1 needed)"
    )
    assert seniors.verdict(
        e, p, np.zeros(5, int), np.array([1, 0, 0]), assigned=False, pinned=False, on_paper=[a]
    ).allowed


def test_the_app_does_not_call_a_pair_without_a_shared_topic_eligible() -> None:
    s = small_panel()
    planned = s.model_copy(update={"plan": make_plan(s).plan})
    facts = Facts.of(planned)
    assert facts.pair_status(4, 1) == "no shared topic"
    by_reviewer = {c.reviewer: c for c in facts.candidates_of_paper(1, limit=10)}
    assert by_reviewer[4].rule is Rule.NO_SHARED_TOPIC
    assert not by_reviewer[4].usable
    assert by_reviewer[2].status.startswith("conflict") and not by_reviewer[2].usable


def test_pin_problems_use_the_planners_words_for_proposed_pins() -> None:
    s = small_panel(max_per_institution=1)
    rules = PairRules(s)
    assert rules.pin_problems([PairRule(reviewer="a", paper="p")]) == []
    both = [PairRule(reviewer="a", paper="p"), PairRule(reviewer="b", paper="p")]
    problems = rules.pin_problems(both)
    assert problems == [
        "pins: proposal p has 2 pinned reviewers from 'lab oster', more than "
        "max_per_institution 1; refused"
    ]
    with pytest.raises(PlanInputError) as caught:
        make_plan(s.model_copy(update={"pins": both}))
    assert caught.value.lines == problems
    assert rules.pin_problems([PairRule(reviewer="c", paper="q")]) == [
        "pins.0: pin (c, q) is a conflict of interest (declared: recent co-author); refused"
    ]
    assert {Rule.CONFLICT, Rule.BLOCKED, Rule.WITHDRAWN} <= PIN_REFUSED


def test_renewed_rules_keep_what_the_changed_lists_do_not_touch() -> None:
    s = every_rule_session(7)
    first = PairRules(s)
    first.why_not(0, 0)
    pinned = s.model_copy(update={"pins": []})
    again = PairRules.renewed(pinned, first)
    assert again.conflict_reasons is first.conflict_reasons
    assert again.pinned_pairs() == set()
    moved = s.model_copy(update={"conflicts": []})
    fresh = PairRules.renewed(moved, first)
    assert fresh.conflict_reasons is not first.conflict_reasons
    reviewer, paper = every_pair(s)
    assert np.array_equal(
        fresh.forbidden(reviewer, paper), PairRules(moved).forbidden(reviewer, paper)
    )


def test_renewed_rules_keep_conflicts_for_equal_lists_and_only_for_them() -> None:
    from review_alloc.samples import workshop

    session = workshop()
    rules = PairRules(session)
    first = rules.conflicts
    # An undo brings back equal lists as new objects: the conflicts need not be derived again.
    copy = session.model_copy(
        update={
            "papers": [p.model_copy() for p in session.papers],
            "reviewers": [r.model_copy() for r in session.reviewers],
        }
    )
    assert PairRules.renewed(copy, rules).__dict__.get("conflicts") is first
    # A changed institution is a changed list: derived again, and the new conflict appears.
    r0 = session.reviewers[0]
    moved = [r0.model_copy(update={"institution": "Harbourlight Lab"}), *session.reviewers[1:]]
    changed = session.model_copy(update={"reviewers": moved})
    renewed = PairRules.renewed(changed, rules)
    assert "conflicts" not in renewed.__dict__
    assert renewed.conflicts.reason_of() == PairRules(changed).conflicts.reason_of()


def test_following_rules_keep_the_sorted_scores_only_for_the_very_same_table() -> None:
    s = every_rule_session(11)
    first = PairRules(s, PairRules(s).conflicts)
    reviewer, paper = every_pair(s)
    first.forbidden(reviewer, paper)
    # A withdrawal leaves the table object alone: its sorted keys are kept, and the rules still
    # say what rules built from nothing say.
    gone = [s.reviewers[0].model_copy(update={"withdrawn": True}), *s.reviewers[1:]]
    withdrawn = s.model_copy(update={"reviewers": gone})
    kept = PairRules.following(withdrawn, first, first.conflicts)
    assert kept.__dict__["_scores"] is first.__dict__["_scores"]
    assert np.array_equal(
        kept.forbidden(reviewer, paper), PairRules(withdrawn).forbidden(reviewer, paper)
    )
    # A new table (every score raised above the minimum) is read again: with the earlier sorted
    # scores, the pairs the earlier table scored low would still be refused.
    t = s.scores
    higher = s.model_copy(
        update={"scores": ScoreTable.from_arrays(t.reviewer, t.paper, np.maximum(t.value, 0.9))}
    )
    renewed = PairRules.following(higher, first, first.conflicts)
    assert "_scores" not in renewed.__dict__
    expected = PairRules(higher).forbidden(reviewer, paper)
    assert np.array_equal(renewed.forbidden(reviewer, paper), expected)
    assert not np.array_equal(expected, first.forbidden(reviewer, paper))
