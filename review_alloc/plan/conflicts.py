"""Conflict rules: declared conflicts plus the ones inferred from the policy's rules."""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from review_alloc.model import Session


def normalise_institution(name: str) -> str:
    """Fold case and whitespace so that 'Univ. of X ' and 'univ.  of x' compare equal."""
    return " ".join(name.split()).casefold()


def email_domain(address: str) -> str:
    """The part after the last '@', lower-cased; empty when there is none."""
    _, at, domain = address.strip().rpartition("@")
    return domain.casefold() if at else ""


@dataclass(frozen=True)
class ConflictSet:
    """Every conflicted (reviewer, paper) pair of a session, by index, with its reasons."""

    reviewer: np.ndarray
    paper: np.ndarray
    reasons: tuple[str, ...]

    def __len__(self) -> int:
        return len(self.reasons)

    def keys(self, n_papers: int) -> np.ndarray:
        """Pair keys `reviewer * n_papers + paper`, sorted, for vectorised membership tests."""
        return np.sort(self.reviewer.astype(np.int64) * n_papers + self.paper)

    def reason_of(self) -> dict[tuple[int, int], str]:
        """Map (reviewer index, paper index) to the reasons, joined."""
        return {
            (int(r), int(p)): why
            for r, p, why in zip(self.reviewer, self.paper, self.reasons, strict=True)
        }


def conflict_pairs(session: Session) -> ConflictSet:
    """Declared conflicts plus the inferred ones (author e-mail, institution, e-mail domain)."""
    rules = session.policy.conflict_rules
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    found: dict[tuple[int, int], list[str]] = defaultdict(list)

    for row in session.conflicts:
        found[(reviewer_at[row.reviewer], paper_at[row.paper])].append(f"declared: {row.reason}")

    by_email: dict[str, list[int]] = defaultdict(list)
    by_institution: dict[str, list[int]] = defaultdict(list)
    by_domain: dict[str, list[int]] = defaultdict(list)
    public = {d.casefold() for d in rules.public_mail_domains}
    for j, reviewer in enumerate(session.reviewers):
        if reviewer.email:
            by_email[reviewer.email.casefold()].append(j)
            domain = email_domain(reviewer.email)
            if domain and domain not in public:
                by_domain[domain].append(j)
        if reviewer.institution.strip():
            by_institution[normalise_institution(reviewer.institution)].append(j)

    for i, paper in enumerate(session.papers):
        if rules.author_email:
            for author in paper.authors:
                for j in by_email.get(author.casefold(), ()):
                    found[(j, i)].append(f"reviewer is an author ({author})")
        if rules.institution:
            for institution in {normalise_institution(x) for x in paper.institutions}:
                for j in by_institution.get(institution, ()):
                    found[(j, i)].append(f"same institution ({session.reviewers[j].institution})")
        if rules.email_domain:
            domains = {email_domain(a) for a in paper.authors} - public - {""}
            for domain in sorted(domains):
                for j in by_domain.get(domain, ()):
                    found[(j, i)].append(f"same e-mail domain ({domain})")

    pairs = sorted(found)
    reviewer = np.fromiter((r for r, _ in pairs), dtype=np.int32, count=len(pairs))
    paper = np.fromiter((p for _, p in pairs), dtype=np.int32, count=len(pairs))
    reasons = tuple("; ".join(dict.fromkeys(found[key])) for key in pairs)
    return ConflictSet(reviewer=reviewer, paper=paper, reasons=reasons)
