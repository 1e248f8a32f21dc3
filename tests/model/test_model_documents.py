"""Policy, entity and plan models: defaults, normalisation and refusals."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta, timezone

import pytest
from pydantic import ValidationError

from review_alloc.model import (
    DEFAULT_PUBLIC_MAIL_DOMAINS,
    Assignment,
    Conflict,
    ConflictRules,
    InputError,
    PairRule,
    Paper,
    Plan,
    PlanFigures,
    Policy,
    Reviewer,
)


def test_policy_defaults_follow_common_practice() -> None:
    policy = Policy()
    # Three reviews per paper with a floor of two is common practice.
    assert (policy.reviews, policy.min_reviews) == (3, 2)
    assert (policy.cap, policy.floor, policy.unscored) == (6, 0, "zero")
    rules = policy.conflict_rules
    assert rules.author_email and rules.institution and rules.email_domain
    assert "gmail.com" in rules.public_mail_domains
    assert tuple(rules.public_mail_domains) == DEFAULT_PUBLIC_MAIL_DOMAINS


def test_policy_refuses_min_reviews_above_reviews() -> None:
    with pytest.raises(ValidationError, match=r"min_reviews: 4 exceeds reviews 3"):
        Policy(reviews=3, min_reviews=4)


def test_policy_refuses_floor_above_cap() -> None:
    with pytest.raises(ValidationError, match=r"floor: 5 exceeds cap 4"):
        Policy(cap=4, floor=5)


@pytest.mark.parametrize(
    "field, value", [("reviews", 0), ("min_reviews", -1), ("cap", -1), ("floor", -2)]
)
def test_policy_refuses_out_of_range_numbers(field: str, value: int) -> None:
    with pytest.raises(ValidationError, match=field):
        Policy(**{field: value})


def test_policy_refuses_unknown_fields_and_unscored_values() -> None:
    with pytest.raises(ValidationError, match="Extra inputs are not permitted"):
        Policy(review=3)  # type: ignore[call-arg]
    with pytest.raises(ValidationError, match="unscored"):
        Policy(unscored="skip")  # type: ignore[arg-type]


def test_public_mail_domains_are_folded_and_checked() -> None:
    rules = ConflictRules(public_mail_domains=[" Mail.Example ", "@post.example", "mail.example"])
    assert rules.public_mail_domains == ["mail.example", "post.example"]
    with pytest.raises(ValidationError, match="is not a mail domain"):
        ConflictRules(public_mail_domains=["someone@mail.example"])


def test_paper_normalises_ids_lists_and_authors() -> None:
    paper = Paper(
        id="  P7 ",
        title=" Tidal sensing ",
        topics=["buoys", " buoys", "", "sonar"],
        authors=["Ada.Quill@Northmere.Example", "ada.quill@northmere.example"],
        institutions=["Northmere Institute", " "],
    )
    assert paper.id == "P7"
    assert paper.title == "Tidal sensing"
    assert paper.topics == ["buoys", "sonar"]
    assert paper.authors == ["ada.quill@northmere.example"]
    assert paper.institutions == ["Northmere Institute"]
    assert (paper.reviews, paper.min_reviews, paper.withdrawn) == (None, None, False)


@pytest.mark.parametrize("bad", ["", "   "])
def test_ids_must_not_be_empty(bad: str) -> None:
    with pytest.raises(ValidationError, match="must not be empty"):
        Paper(id=bad)
    with pytest.raises(ValidationError, match="must not be empty"):
        Reviewer(id=bad)
    with pytest.raises(ValidationError, match="must not be empty"):
        Conflict(reviewer=bad, paper="P1")


@pytest.mark.parametrize("bad", ["cyra", "cyra@", "@wren.example", "cy ra@wren.example", "a@b@c"])
def test_bad_email_addresses_are_refused(bad: str) -> None:
    with pytest.raises(ValidationError, match="is not an e-mail address"):
        Reviewer(id="R1", email=bad)
    with pytest.raises(ValidationError, match="is not an e-mail address"):
        Paper(id="P1", authors=[bad])


def test_reviewer_email_is_lower_cased_and_may_be_empty() -> None:
    assert Reviewer(id="R1", email=" Cyra.Vell@Wren.Example ").email == "cyra.vell@wren.example"
    assert Reviewer(id="R2").email == ""


def test_paper_reviews_must_be_at_least_one_and_reviewer_cap_not_negative() -> None:
    with pytest.raises(ValidationError, match="greater than or equal to 1"):
        Paper(id="P1", reviews=0)
    with pytest.raises(ValidationError, match="greater than or equal to 0"):
        Reviewer(id="R1", cap=-1)


def test_conflict_and_pair_rule_defaults() -> None:
    assert Conflict(reviewer="R1", paper="P1").reason == "declared"
    assert PairRule(reviewer="R1", paper="P1").reason == ""
    with pytest.raises(ValidationError, match="Extra inputs"):
        PairRule(reviewer="R1", paper="P1", weight=2)  # type: ignore[call-arg]


def _figures(**changes: float) -> PlanFigures:
    values: dict[str, float] = {
        "required_coverage": 2,
        "required_demand": 2,
        "coverage": 2,
        "demand": 3,
        "floors_met": 1,
        "floors_demand": 1,
        "total_score": 1.25,
        "assigned": 2,
    }
    values.update(changes)
    return PlanFigures(**values)  # type: ignore[arg-type]


def _assignments() -> list[Assignment]:
    return [
        Assignment(paper="P1", reviewer="R1", score=0.5),
        Assignment(paper="P1", reviewer="R2", score=0.75),
    ]


def test_plan_figures_refuse_counts_above_their_demand() -> None:
    with pytest.raises(ValidationError, match="coverage: 4 exceeds demand 3"):
        _figures(coverage=4, assigned=4)
    with pytest.raises(ValidationError, match="floors_met: 2 exceeds floors_demand 1"):
        _figures(floors_met=2)


def test_plan_stores_created_at_in_utc() -> None:
    local = datetime(2027, 3, 1, 10, 30, tzinfo=timezone(timedelta(hours=1)))
    plan = Plan(
        assignments=_assignments(), figures=_figures(), created_at=local, checked=True, method="t"
    )
    assert plan.created_at == datetime(2027, 3, 1, 9, 30, tzinfo=UTC)
    assert plan.created_at.utcoffset() == timedelta(0)


def test_plan_refuses_naive_times() -> None:
    with pytest.raises(ValidationError, match="must include a time zone"):
        Plan(
            assignments=_assignments(),
            figures=_figures(),
            created_at=datetime(2027, 3, 1, 9, 30),
            checked=True,
            method="t",
        )


def test_plan_refuses_repeated_pairs_and_figures_that_disagree() -> None:
    twice = [*_assignments(), Assignment(paper="P1", reviewer="R1", score=0.5)]
    with pytest.raises(ValidationError, match=r"assignments.2: pair \(R1, P1\) repeats"):
        Plan(
            assignments=twice,
            figures=_figures(assigned=3, total_score=1.75),
            checked=False,
            method="t",
        )
    with pytest.raises(ValidationError, match="figures.assigned: 5 but there are 2"):
        Plan(assignments=_assignments(), figures=_figures(assigned=5), checked=False, method="t")
    with pytest.raises(ValidationError, match="figures.total_score: 9.0"):
        Plan(
            assignments=_assignments(), figures=_figures(total_score=9.0), checked=False, method="t"
        )


def test_assignment_score_must_be_finite_and_not_negative() -> None:
    with pytest.raises(ValidationError):
        Assignment(paper="P1", reviewer="R1", score=-0.1)
    with pytest.raises(ValidationError):
        Assignment(paper="P1", reviewer="R1", score=float("nan"))


def test_input_error_lines_and_text() -> None:
    error = InputError(["a.csv: line 2: one", "a.csv: line 3: two"])
    assert error.lines == ["a.csv: line 2: one", "a.csv: line 3: two"]
    assert str(error) == "a.csv: line 2: one\na.csv: line 3: two"
    assert InputError("single").lines == ["single"]
    with pytest.raises(ValueError):
        InputError([])
