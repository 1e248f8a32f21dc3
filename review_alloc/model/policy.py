"""The planning policy: per-paper reviews, per-reviewer load limits and the conflict rules."""

from __future__ import annotations

from typing import Annotated, Literal, Self

from pydantic import AfterValidator, ConfigDict, Field, model_validator

from review_alloc.model.base import DocumentModel
from review_alloc.model.limits import MAX_COUNT, MAX_SCORE
from review_alloc.model.signals import ScoreRecipe
from review_alloc.model.text import matched_text_problem, nfc

DEFAULT_PUBLIC_MAIL_DOMAINS: tuple[str, ...] = (
    "gmail.com",
    "googlemail.com",
    "outlook.com",
    "hotmail.com",
    "live.com",
    "yahoo.com",
    "icloud.com",
    "me.com",
    "aol.com",
    "proton.me",
    "protonmail.com",
    "gmx.de",
    "gmx.net",
    "web.de",
    "mail.ru",
    "yandex.ru",
    "qq.com",
    "163.com",
    "126.com",
)
"""Mail providers shared by strangers: a shared domain there says nothing (common practice)."""


def _domains(values: list[str]) -> list[str]:
    seen: dict[str, None] = {}
    for value in values:
        text = nfc(value).strip().lower().lstrip("@")
        if not text:
            continue
        problem = matched_text_problem(text)
        if problem is not None:
            raise ValueError(f"{value.strip()!r} {problem}")
        if "@" in text or any(c.isspace() for c in text):
            raise ValueError(f"{value!r} is not a mail domain (expected e.g. mail.example)")
        seen.setdefault(text, None)
    return list(seen)


class ConflictRules(DocumentModel):
    """Which conflicts of interest are inferred on top of the declared ones."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    author_email: bool = True
    """The reviewer's e-mail address is among the paper's authors."""
    institution: bool = True
    """The reviewer's institution is among the paper's (case and whitespace folded)."""
    email_domain: bool = True
    """The reviewer's e-mail domain equals an author's, unless it is a public mail domain."""
    public_mail_domains: Annotated[list[str], AfterValidator(_domains)] = Field(
        default_factory=lambda: list(DEFAULT_PUBLIC_MAIL_DOMAINS)
    )


class Policy(DocumentModel):
    """Session-wide defaults; papers and reviewers may override reviews, min_reviews, cap, floor."""

    # Frozen like the entities: a changed policy is a new object (see `model.entities`).
    model_config = ConfigDict(extra="forbid", frozen=True)

    reviews: int = Field(default=3, ge=1, le=MAX_COUNT)
    """Reviews wanted per paper (three is the usual target, common practice)."""
    min_reviews: int = Field(default=2, ge=0, le=MAX_COUNT)
    """Reviews a paper must have (two is the usual floor, common practice)."""
    cap: int = Field(default=6, ge=0, le=MAX_COUNT)
    """Most papers per reviewer."""
    floor: int = Field(default=0, ge=0, le=MAX_COUNT)
    """Fewest papers per reviewer, met as far as the papers allow."""
    overload_allowance: int = Field(default=0, ge=0, le=MAX_COUNT)
    """Papers a reviewer may take above their cap when that is the only way to cover more
    reviews (0: never). Used after coverage and before floors; reviewers may override it."""
    unscored: Literal["zero", "exclude"] = "zero"
    """A pair without a score row is eligible with score 0 (`zero`) or not eligible (`exclude`)."""
    conflict_rules: ConflictRules = Field(default_factory=ConflictRules)
    senior_min: int = Field(default=0, ge=0, le=MAX_COUNT)
    """Senior reviewers wanted per paper (papers may override); 0 turns the rule off."""
    senior_hard: bool = False
    """Seniors are a hard rule (the plan fails if unmet) instead of the tier after required
    coverage (met as far as the seniors allow, shortfalls reported)."""
    max_per_institution: int | None = Field(default=None, ge=1, le=MAX_COUNT)
    """Most reviewers of one institution on one paper; `None` turns the rule off."""
    require_shared_topic: bool = False
    """A pair is eligible only when reviewer and paper share a topic."""
    min_score: float | None = Field(default=None, ge=0, le=MAX_SCORE, allow_inf_nan=False)
    """A pair scoring below this is not eligible; `None` turns the rule off."""
    balance: float = Field(default=0.0, ge=0, le=1000, allow_inf_nan=False)
    """Load-balance strength: each reviewer's k-th paper costs `balance * (k - 1)` score units."""
    bottleneck: bool = False
    """Maximise the lowest score among the assigned pairs that are not pinned (a pin may score
    lower), after coverage and before floors and total score."""
    max_leads: int = Field(default=3, ge=0, le=MAX_COUNT)
    """Most papers one reviewer leads."""
    recipe: ScoreRecipe | None = None
    """How the scores were made from the chair's signals (`model.signals`); `None`: the
    scores file is used as it is."""

    @model_validator(mode="after")
    def _limits_agree(self) -> Self:
        problems = []
        if self.min_reviews > self.reviews:
            problems.append(f"min_reviews: {self.min_reviews} exceeds reviews {self.reviews}")
        if self.floor > self.cap:
            problems.append(f"floor: {self.floor} exceeds cap {self.cap}")
        if problems:
            raise ValueError("\n".join(problems))
        return self
