"""The checker's hard-rule pass against a row-by-row reference of DESIGN.md's hard rules.

Each case breaks a checked plan at random (conflicted, blocked, duplicated and withdrawn pairs,
dropped pins, crowded institutions) and compares the pairs the checker flags, per rule, with
the same rules evaluated in plain Python straight from the session's rows.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from review_alloc.model import Assignment, Session
from review_alloc.plan import PlanCheckError, check_plan, make_plan
from tests.plan.test_planner import random_session

_PAIR = r"\(([^,()]+), ([^,()]+)\)"


def _flagged(problems: list[str]) -> dict[str, set[tuple[str, ...]]]:
    """Pairs (or ids) named per rule in the checker's problem lines."""
    found: dict[str, set[tuple[str, ...]]] = {
        k: set() for k in ("conflict", "blocked", "twice", "pin", "reviewer", "institution")
    }
    for line in problems:
        if m := re.match(rf"conflicted pair {_PAIR} is assigned", line):
            found["conflict"].add(m.groups())
        elif m := re.match(rf"blocked pair {_PAIR} is assigned", line):
            found["blocked"].add(m.groups())
        elif m := re.match(rf"pair {_PAIR} is assigned twice", line):
            found["twice"].add(m.groups())
        elif m := re.match(rf"pinned pair {_PAIR} is missing", line):
            found["pin"].add(m.groups())
        elif m := re.match(r"withdrawn reviewer (\S+) is assigned", line):
            found["reviewer"].add(m.groups())
        elif m := re.match(r"paper (\S+) has (\d+) reviewers from '([^']*)'", line):
            found["institution"].add((m.group(1), m.group(3)))
    return found


def _reference(session: Session, pairs: list[tuple[str, str]]) -> dict[str, set[tuple[str, ...]]]:
    """DESIGN.md's hard rules, one assignment row at a time."""
    conflicted = {(c.reviewer, c.paper) for c in session.conflicts}
    blocked = {(b.reviewer, b.paper) for b in session.blocks}
    gone = {r.id for r in session.reviewers if r.withdrawn}
    institution = {r.id: " ".join(r.institution.split()).casefold() for r in session.reviewers}
    seen: dict[tuple[str, str], int] = {}
    per_group: dict[tuple[str, str], int] = {}
    for pair in pairs:
        seen[pair] = seen.get(pair, 0) + 1
        name = institution[pair[0]]
        if name:
            per_group[(pair[1], name)] = per_group.get((pair[1], name), 0) + 1
    limit = session.policy.max_per_institution
    return {
        "conflict": {p for p in pairs if p in conflicted},
        "blocked": {p for p in pairs if p in blocked},
        "twice": {p for p, c in seen.items() if c > 1},
        "pin": {(p.reviewer, p.paper) for p in session.pins} - set(pairs),
        "reviewer": {(r,) for r, _ in pairs if r in gone},
        "institution": {g for g, c in per_group.items() if limit is not None and c > limit},
    }


@pytest.mark.parametrize("seed", range(25))
def test_hard_rule_pass_flags_what_a_row_by_row_check_flags(seed: int) -> None:
    rng = np.random.default_rng(seed)
    session = random_session(500 + seed, pins=True)
    plan = make_plan(session).plan
    assignments = list(plan.assignments)
    changes = rng.permutation(["conflict", "block", "twice", "unpin", "withdraw", "crowd"])
    for change in changes[: int(rng.integers(1, 5))]:
        if change == "conflict" and session.conflicts:
            c = session.conflicts[int(rng.integers(len(session.conflicts)))]
            assignments.append(Assignment(paper=c.paper, reviewer=c.reviewer, score=0.0))
        elif change == "block" and session.blocks:
            b = session.blocks[int(rng.integers(len(session.blocks)))]
            assignments.append(Assignment(paper=b.paper, reviewer=b.reviewer, score=0.0))
        elif change == "twice" and assignments:
            assignments.append(assignments[int(rng.integers(len(assignments)))])
        elif change == "unpin" and session.pins:
            pin = session.pins[0]
            assignments = [
                a for a in assignments if (a.reviewer, a.paper) != (pin.reviewer, pin.paper)
            ]
        elif change == "withdraw" and assignments:
            who = assignments[int(rng.integers(len(assignments)))].reviewer
            session = session.model_copy(
                update={
                    "reviewers": [
                        r.model_copy(update={"withdrawn": True}) if r.id == who else r
                        for r in session.reviewers
                    ]
                }
            )
        elif change == "crowd":
            reviewers = [
                r.model_copy(update={"institution": f"Lab {int(rng.integers(2))}"})
                for r in session.reviewers
            ]
            policy = session.policy.model_copy(update={"max_per_institution": 1})
            session = session.model_copy(update={"reviewers": reviewers, "policy": policy})
    broken = plan.model_copy(update={"assignments": assignments})
    expected = _reference(session, [(a.reviewer, a.paper) for a in assignments])
    try:
        check_plan(session, broken, None)
        problems: list[str] = []
    except PlanCheckError as error:
        problems = error.problems
    assert _flagged(problems) == expected
