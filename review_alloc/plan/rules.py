"""May this reviewer review this paper, and if not, why: every chair rule, asked in one place.

Pair rules hold for a pair alone: a conflict of interest (declared or inferred), a block, a
withdrawn reviewer or paper, no score under `unscored = "exclude"`, a score below the policy's
`min_score`, no topic shared under `require_shared_topic`. A pin lifts the last three (a pinned
pair is always a candidate; `pin_problems` refuses pins below the minimum score or without a
shared topic, with the planner's words). Plan rules depend on the rest of a plan: the reviewer's
cap, the paper's reviews, the institution limit per paper, and the seats a hard senior rule keeps
for seniors.

The network builder, the pin checks, the pruning of a stored plan, the explanations and the
app's pair lists all ask `PairRules`; only the independent checker (`plan.checker`) derives the
rules again on its own, on purpose, and the tests compare the two.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from enum import StrEnum
from functools import cached_property
from operator import attrgetter

import numpy as np

from review_alloc.model import PairRule, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.figures import active_demands
from review_alloc.plan.institutions import reviewer_institutions
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import contains, key_order, pair_keys, positions_in
from review_alloc.plan.seniors import paper_senior_need

_TOPIC_SLICE = 2_000_000
"""Pairs whose shared topic is looked up at once (a few arrays of this times the topics)."""

MAX_CANDIDATE_PAIRS = 60_000_000
"""Above this many candidate pairs the network would not fit the memory budget."""

_SCORE_EPSILON = 1e-12
"""A score this close below `min_score` still meets it (scores read back from text round)."""


class Rule(StrEnum):
    """The rule a pair breaks (`ELIGIBLE` when it breaks none); the value is its short name."""

    ELIGIBLE = "eligible"
    CONFLICT = "conflict"
    BLOCKED = "blocked"
    WITHDRAWN = "withdrawn"
    UNSCORED = "unscored"
    BELOW_MIN_SCORE = "below min score"
    NO_SHARED_TOPIC = "no shared topic"
    CAP_FULL = "cap full"
    PAPER_FULL = "paper full"
    INSTITUTION_LIMIT = "institution limit"
    SENIOR_SEATS = "senior seats"


PAIR_RULES: tuple[Rule, ...] = (
    Rule.ELIGIBLE,
    Rule.CONFLICT,
    Rule.BLOCKED,
    Rule.WITHDRAWN,
    Rule.UNSCORED,
    Rule.BELOW_MIN_SCORE,
    Rule.NO_SHARED_TOPIC,
)
"""The pair rules in the order they are asked; `PairRules.codes` indexes this tuple."""

PLAN_RULES: tuple[Rule, ...] = (
    Rule.CAP_FULL,
    Rule.PAPER_FULL,
    Rule.INSTITUTION_LIMIT,
    Rule.SENIOR_SEATS,
)
"""Rules that depend on the rest of a plan, asked after the pair rules."""

PIN_REFUSED = frozenset(
    {Rule.CONFLICT, Rule.BLOCKED, Rule.WITHDRAWN, Rule.BELOW_MIN_SCORE, Rule.NO_SHARED_TOPIC}
)
"""Rules under which a pin on the pair is refused (an unscored pin counts as score 0)."""


@dataclass(frozen=True)
class Verdict:
    """A pair's standing: the rule that decides it and the words the chair reads."""

    rule: Rule
    text: str

    @property
    def allowed(self) -> bool:
        """No rule keeps the pair out."""
        return self.rule is Rule.ELIGIBLE

    @property
    def pinnable(self) -> bool:
        """A pin on this pair would not be refused for the pair itself."""
        return self.rule not in PIN_REFUSED


@dataclass(frozen=True)
class ExcludedPair:
    """A pair the planner may not use, with the rule (`kind`) and the reason in words."""

    reviewer: str
    paper: str
    kind: Rule
    reason: str


def fold_topic(topic: str) -> str:
    """A topic as compared by the shared-topic rule: case and runs of spaces folded."""
    return " ".join(topic.split()).casefold()



def _index_pairs(session: Session, rows: Iterable[PairRule]) -> tuple[np.ndarray, np.ndarray]:
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    rows = list(rows)
    reviewer = np.array([reviewer_at[r.reviewer] for r in rows], dtype=np.int64)
    paper = np.array([paper_at[r.paper] for r in rows], dtype=np.int64)
    return reviewer, paper


# Which of the session's lists each cached fact is derived from: `PairRules.renewed` keeps a
# fact of the previous session when every list it names is the very same object.
_DEPENDS: dict[str, tuple[str, ...]] = {
    "conflicts": ("papers", "reviewers", "conflicts", "policy"),
    "conflict_reasons": ("papers", "reviewers", "conflicts", "policy"),
    "_conflict_keys": ("papers", "reviewers", "conflicts", "policy"),
    "_scores": ("papers", "scores"),
    "_topic_sets": ("papers", "reviewers"),
    "_topic_index": ("papers", "reviewers"),
    "_blocked": ("papers", "reviewers", "blocks"),
    "_pinned": ("papers", "reviewers", "pins"),
    "_withdrawn": ("papers", "reviewers"),
    "_demands": ("papers", "reviewers", "policy"),
    "_allowed_load": ("papers", "reviewers", "policy"),
    "_seniors": ("papers", "reviewers", "policy"),
    "_institutions": ("reviewers",),
}


class PairRules:
    """Every rule of one session, with what it needs computed once, on first use."""

    def __init__(self, session: Session, conflicts: ConflictSet | None = None) -> None:
        self.session = session
        self.n_papers = len(session.papers)
        self._n = max(self.n_papers, 1)
        if conflicts is not None:
            self.__dict__["conflicts"] = conflicts

    @classmethod
    def renewed(cls, session: Session, previous: PairRules | None) -> PairRules:
        """Rules of `session`, keeping whatever `previous` derived from the same lists (a pin,
        a block or a new plan leaves conflicts, scores and topics alone; an undo brings back
        equal lists as new objects). Every fact is a pure function of its fields, so equal
        fields give equal facts."""
        rules = cls(session)
        if previous is None:
            return rules
        old = previous.session
        same: dict[str, bool] = {}

        def unchanged(field: str) -> bool:
            if field not in same:
                a, b = getattr(old, field), getattr(session, field)
                same[field] = a is b or a == b
            return same[field]

        for name, fields in _DEPENDS.items():
            if name in previous.__dict__ and all(unchanged(f) for f in fields):
                rules.__dict__[name] = previous.__dict__[name]
        return rules

    @classmethod
    def following(
        cls,
        session: Session,
        previous: PairRules | None,
        conflicts: ConflictSet,
        changed: tuple[np.ndarray, np.ndarray] | None = None,
    ) -> PairRules:
        """Rules of `session` with `conflicts`, keeping `previous`'s sorted score table when it
        was read from this very table with the same paper count (a patched re-plan: comparing
        whole entity lists, as `renewed` does, would cost more than it saves).

        `changed` (positions of the reviewers and papers whose fields may differ; every other
        entity of `session` equals the one at its place in `previous.session`, as
        `plan.patch.session_change` finds) lets the withdrawn flags be read again only there.
        """
        rules = cls(session, conflicts)
        old = previous.session if previous is not None else None
        if (
            changed is not None
            and previous is not None
            and old is not None
            and "_withdrawn" in previous.__dict__
            and len(old.reviewers) == len(session.reviewers)
            and len(old.papers) == len(session.papers)
        ):
            gone_r, gone_p = (flags.copy() for flags in previous.__dict__["_withdrawn"])
            for j in changed[0].tolist():
                gone_r[j] = session.reviewers[j].withdrawn
            for i in changed[1].tolist():
                gone_p[i] = session.papers[i].withdrawn
            rules.__dict__["_withdrawn"] = (gone_r, gone_p)
        if (
            previous is not None
            and previous.session.scores is session.scores
            and previous._n == rules._n
            and "_scores" in previous.__dict__
        ):
            # The sorted keys are `reviewer * n + paper` of the table's own rows: nothing else.
            rules.__dict__["_scores"] = previous.__dict__["_scores"]
        return rules

    @property
    def noun(self) -> str:
        """'proposal' for a grant panel, 'paper' otherwise."""
        return self.session.noun

    # -- facts, each derived once ----------------------------------------------------------

    @cached_property
    def conflicts(self) -> ConflictSet:
        """Declared and inferred conflicts of interest."""
        return conflict_pairs(self.session)

    @cached_property
    def conflict_reasons(self) -> dict[tuple[int, int], str]:
        """(reviewer, paper) index pair → the conflict's reasons."""
        return self.conflicts.reason_of()

    @cached_property
    def _conflict_keys(self) -> np.ndarray:
        return self.conflicts.keys(self._n)

    @cached_property
    def _scores(self) -> tuple[np.ndarray, np.ndarray]:
        """Score table as (sorted pair keys, values)."""
        t = self.session.scores
        return key_order(pair_keys(t.reviewer, t.paper, self._n), t.value)

    @cached_property
    def _topic_sets(self) -> tuple[list[frozenset[str]], list[frozenset[str]]]:
        s = self.session
        return (
            [frozenset(fold_topic(t) for t in r.topics) for r in s.reviewers],
            [frozenset(fold_topic(t) for t in p.topics) for p in s.papers],
        )

    @cached_property
    def _topic_index(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
        """Over one topic vocabulary: the sorted reviewer-topic keys (reviewer * width +
        topic), each paper's topic ids in CSR form (starts, ids), and the width."""
        vocab: dict[str, int] = {}
        reviewer_sets, paper_sets = self._topic_sets
        rows = [j for j, topics in enumerate(reviewer_sets) for _ in topics]
        cols = [vocab.setdefault(t, len(vocab)) for topics in reviewer_sets for t in topics]
        ids = [vocab.setdefault(t, len(vocab)) for topics in paper_sets for t in topics]
        width = max(len(vocab), 1)
        keys = np.sort(np.asarray(rows, dtype=np.int64) * width + np.asarray(cols, dtype=np.int64))
        starts = np.zeros(len(paper_sets) + 1, dtype=np.int64)
        starts[1:] = np.cumsum([len(topics) for topics in paper_sets])
        return keys, starts, np.asarray(ids, dtype=np.int64), width

    @cached_property
    def _blocked(self) -> tuple[set[tuple[int, int]], np.ndarray]:
        r, p = _index_pairs(self.session, self.session.blocks)
        return set(zip(r.tolist(), p.tolist(), strict=True)), np.sort(pair_keys(r, p, self._n))

    @cached_property
    def _pinned(self) -> tuple[set[tuple[int, int]], np.ndarray]:
        r, p = _index_pairs(self.session, self.session.pins)
        return set(zip(r.tolist(), p.tolist(), strict=True)), np.sort(pair_keys(r, p, self._n))

    @cached_property
    def _withdrawn(self) -> tuple[np.ndarray, np.ndarray]:
        s = self.session
        # Attribute getters in map(): a third of the comprehensions' time on tens of thousands.
        return (
            np.fromiter(map(attrgetter("withdrawn"), s.reviewers), bool, len(s.reviewers)),
            np.fromiter(map(attrgetter("withdrawn"), s.papers), bool, len(s.papers)),
        )

    @cached_property
    def _demands(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        return active_demands(self.session)

    @cached_property
    def _allowed_load(self) -> np.ndarray:
        """Cap plus the overload the chair allows, per reviewer (what the checker accepts)."""
        return self._demands[2] + overload_allowances(self.session)

    @cached_property
    def _seniors(self) -> tuple[np.ndarray, np.ndarray]:
        """(seniors each paper needs, whether each reviewer is senior)."""
        return paper_senior_need(self.session), self.session.reviewer_senior_array()

    @cached_property
    def _institutions(self) -> tuple[np.ndarray, list[str]]:
        """(institution id per reviewer or -1, the normalised names)."""
        return reviewer_institutions(self.session)

    def sorted_scores(self) -> tuple[np.ndarray, np.ndarray]:
        """The score table as (pair keys `reviewer * n_papers + paper`, sorted; their values)."""
        return self._scores

    def blocked_pairs(self) -> set[tuple[int, int]]:
        """(reviewer, paper) index pairs the chair has blocked."""
        return self._blocked[0]

    def pinned_pairs(self) -> set[tuple[int, int]]:
        """(reviewer, paper) index pairs the chair has pinned."""
        return self._pinned[0]

    def score(self, reviewer: int, paper: int) -> float | None:
        """The score of a pair, or None when the table has no row for it."""
        keys, values = self._scores
        key = reviewer * self._n + paper
        at = int(np.searchsorted(keys, key))
        if at < len(keys) and keys[at] == key:
            return float(values[at])
        return None

    def scores_of(self, reviewer: np.ndarray, paper: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(scored, score) per pair of index arrays; unscored pairs read 0."""
        keys, values = self._scores
        found, at = positions_in(pair_keys(reviewer, paper, self._n), keys)
        return found, np.where(found, values[at] if len(keys) else 0.0, 0.0)

    def shared_topic(self, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
        """Per pair of index arrays: do reviewer and paper share a topic (case, spaces folded)?

        Each pair is expanded into the paper's topics and each (reviewer, topic) looked up
        among the reviewers' sorted keys: plain numpy, so that re-checking a stored plan when
        a session opens needs no scipy. Pairs go in slices to bound the memory."""
        out = np.zeros(len(reviewer), dtype=bool)
        keys, starts, ids, width = self._topic_index
        if len(reviewer) == 0 or len(keys) == 0 or len(ids) == 0:
            return out
        r_all = np.asarray(reviewer, dtype=np.int64)
        p_all = np.asarray(paper, dtype=np.int64)
        for lo in range(0, len(r_all), _TOPIC_SLICE):
            r, p = r_all[lo : lo + _TOPIC_SLICE], p_all[lo : lo + _TOPIC_SLICE]
            first = starts[p]
            counts = starts[p + 1] - first
            total = int(counts.sum())
            if total == 0:
                continue
            owner = np.repeat(np.arange(len(r)), counts)
            within = np.arange(total) - np.repeat(np.cumsum(counts) - counts, counts)
            topic = ids[np.repeat(first, counts) + within]
            found, _ = positions_in(r[owner] * width + topic, keys)
            out[lo + owner[found]] = True
        return out

    # -- candidates and eligible pairs (the builder's view) ---------------------------------

    def candidate_pairs(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(reviewer, paper, score) arrays of the candidates, before conflicts and blocks.

        Under `unscored = "zero"` every pair of active reviewer and active paper is a candidate
        and missing scores count as 0; under `"exclude"` only scored pairs are. Pins always are.
        """
        s = self.session
        n_p = self.n_papers
        gone_r, gone_p = self._withdrawn
        active_r, active_p = np.flatnonzero(~gone_r), np.flatnonzero(~gone_p)
        s_keys, s_values = self._scores
        if s.policy.unscored == "zero":
            count = len(active_r) * len(active_p)
            if count > MAX_CANDIDATE_PAIRS:
                raise PlanInputError(
                    [
                        f"policy.unscored: 'zero' makes every pair a candidate ({count:,} pairs, "
                        f"more than the {MAX_CANDIDATE_PAIRS:,} this machine can plan); import "
                        "with --unscored exclude so that only scored pairs are candidates"
                    ]
                )
            keys = (active_r[:, None].astype(np.int64) * n_p + active_p[None, :]).ravel()
        else:
            keep = ~gone_r[s_keys // self._n] & ~gone_p[s_keys % self._n]
            keys = s_keys[keep]
        if s.pins:
            keys = np.union1d(keys, self._pinned[1])
        found, at = positions_in(keys, s_keys)
        scores = np.where(found, s_values[at] if len(s_keys) else 0.0, 0.0)
        return keys // self._n, keys % self._n, scores

    def eligible_pairs(
        self, threshold: float | None = None, *, slack: float = 0.0
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(reviewer, paper, score, keys, pinned) of the pairs a plan may use, in key order.

        `threshold` leaves out unpinned pairs scoring below `threshold - slack` (the bottleneck
        search; the builder passes half its score step as the slack).
        """
        reviewer, paper, score = self.candidate_pairs()
        keys = pair_keys(reviewer, paper, self.n_papers)
        banned = self._conflict_keys
        if self.session.blocks:
            banned = np.union1d(banned, self._blocked[1])
        keep = ~contains(keys, banned)
        reviewer, paper, score, keys = reviewer[keep], paper[keep], score[keep], keys[keep]
        pinned = contains(keys, self._pinned[1])
        low, no_topic = self._score_and_topic(reviewer, paper, score)
        keep = ~(low | no_topic) | pinned
        if threshold is not None:
            keep &= (score >= threshold - slack) | pinned
        return reviewer[keep], paper[keep], score[keep], keys[keep], pinned[keep]

    def _score_and_topic(
        self, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray]:
        """(below min score, no shared topic) per pair, pins not yet excepted."""
        policy = self.session.policy
        none = np.zeros(len(score), dtype=bool)
        low = none if policy.min_score is None else score < policy.min_score - _SCORE_EPSILON
        no_topic = ~self.shared_topic(reviewer, paper) if policy.require_shared_topic else none
        return low, no_topic

    # -- pair rules ------------------------------------------------------------------------

    def codes(
        self, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray | None = None
    ) -> np.ndarray:
        """Per pair of index arrays, the first pair rule it breaks, as an index into
        `PAIR_RULES` (0: none). `score` defaults to the session's (0 where unscored)."""
        broken = self._broken(reviewer, paper, score)
        code = np.zeros(len(broken[0]), dtype=np.int8)
        for k in range(len(broken), 0, -1):  # the first rule broken wins
            code[broken[k - 1]] = k
        return code

    def _broken(
        self, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray | None
    ) -> list[np.ndarray]:
        """Per rule of `PAIR_RULES[1:]`, which of the pairs break it."""
        reviewer = np.asarray(reviewer, dtype=np.int64)
        paper = np.asarray(paper, dtype=np.int64)
        keys = pair_keys(reviewer, paper, self.n_papers)
        scored, table_score = self.scores_of(reviewer, paper)
        score = table_score if score is None else np.asarray(score, dtype=np.float64)
        pinned = contains(keys, self._pinned[1])
        gone_r, gone_p = self._withdrawn
        low, no_topic = self._score_and_topic(reviewer, paper, score)
        return [
            contains(keys, self._conflict_keys),
            contains(keys, self._blocked[1]),
            gone_r[reviewer] | gone_p[paper],
            ~scored & ~pinned & (self.session.policy.unscored == "exclude"),
            low & ~pinned,
            no_topic & ~pinned,
        ]

    def pair_checks(self, reviewer: int, paper: int) -> list[tuple[Rule, bool, bool]]:
        """Every pair rule for one pair, in the order asked: (rule, whether the policy has it
        on, whether the pair breaks it). A pin lifts the score and topic rules."""
        policy = self.session.policy
        on = (
            True,
            True,
            True,
            policy.unscored == "exclude",
            policy.min_score is not None,
            policy.require_shared_topic,
        )
        broken = self._broken(np.array([reviewer]), np.array([paper]), None)
        return [
            (rule, active, bool(hit[0]))
            for rule, active, hit in zip(PAIR_RULES[1:], on, broken, strict=True)
        ]

    def forbidden(
        self, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray | None = None
    ) -> np.ndarray:
        """Per pair of index arrays: does a pair rule keep it out of every plan?"""
        reviewer = np.asarray(reviewer, dtype=np.int64)
        paper = np.asarray(paper, dtype=np.int64)
        gone_r, gone_p = self._withdrawn
        # A withdrawn reviewer or paper is forbidden whatever else holds: the score lookups
        # and topic checks run only on the other pairs (a withdrawal's patch asks about the
        # tens of thousands of pairs of the reviewers who left).
        out = gone_r[reviewer] | gone_p[paper]
        rest = np.flatnonzero(~out)
        if len(rest):
            part = None if score is None else np.asarray(score, dtype=np.float64)[rest]
            out[rest] = self.codes(reviewer[rest], paper[rest], part) > 0
        return out

    def pair_verdict(self, reviewer: int, paper: int) -> Verdict:
        """The first pair rule a pair breaks, in the chair's words (`ELIGIBLE` when none)."""
        s = self.session
        pair = (reviewer, paper)
        why = self.conflict_reasons.get(pair)
        if why is not None:
            return Verdict(Rule.CONFLICT, f"conflict: {why}")
        if pair in self._blocked[0]:
            return Verdict(Rule.BLOCKED, "blocked by the chair")
        if s.reviewers[reviewer].withdrawn:
            return Verdict(Rule.WITHDRAWN, "withdrawn reviewer")
        if s.papers[paper].withdrawn:
            return Verdict(Rule.WITHDRAWN, f"withdrawn {self.noun}")
        if pair in self._pinned[0]:
            return Verdict(Rule.ELIGIBLE, "eligible")
        score = self.score(reviewer, paper)
        policy = s.policy
        if score is None and policy.unscored == "exclude":
            return Verdict(Rule.UNSCORED, "not eligible: unscored")
        value = 0.0 if score is None else score
        if policy.min_score is not None and value < policy.min_score - _SCORE_EPSILON:
            return Verdict(
                Rule.BELOW_MIN_SCORE, f"below min score ({value:g} < {policy.min_score:g})"
            )
        if policy.require_shared_topic:
            reviewer_topics, paper_topics = self._topic_sets
            if not reviewer_topics[reviewer] & paper_topics[paper]:
                return Verdict(Rule.NO_SHARED_TOPIC, "no shared topic")
        return Verdict(Rule.ELIGIBLE, "eligible")

    def why_not(self, reviewer: int, paper: int) -> str | None:
        """Why the pair rules keep a pair out of every plan, or None when they allow it."""
        verdict = self.pair_verdict(reviewer, paper)
        return None if verdict.allowed else verdict.text

    def excluded_pairs(self) -> list[ExcludedPair]:
        """Pairs the score rule would admit (scored ones, every pair under `unscored = "zero"`,
        and pins) that a pair rule excludes, with reasons; unscored pairs under `"exclude"` are
        left out (there are too many; `why_not` names them)."""
        s = self.session
        n_p = self._n
        if s.policy.unscored == "zero":
            rr, pp = np.meshgrid(
                np.arange(len(s.reviewers)), np.arange(len(s.papers)), indexing="ij"
            )
            keys = pair_keys(rr.ravel(), pp.ravel(), n_p)
        else:
            keys = np.unique(self._scores[0])
        keys = np.union1d(keys, self._pinned[1])
        reviewer, paper = keys // n_p, keys % n_p
        code = self.codes(reviewer, paper)
        out = []
        for k in np.flatnonzero(code).tolist():
            j, i = int(reviewer[k]), int(paper[k])
            out.append(
                ExcludedPair(
                    s.reviewers[j].id, s.papers[i].id, PAIR_RULES[code[k]], self.why_not(j, i) or ""
                )
            )
        return out

    # -- plan rules ------------------------------------------------------------------------

    def verdict(
        self,
        reviewer: int,
        paper: int,
        loads: np.ndarray,
        counts: np.ndarray,
        *,
        assigned: bool,
        pinned: bool,
        on_paper: Iterable[int] = (),
    ) -> Verdict:
        """A pair's standing against a plan with these loads and review counts, `on_paper`
        being the reviewers the plan has on the paper (for the institution and senior rules)."""
        if pinned:
            return Verdict(Rule.ELIGIBLE, "pinned" if assigned else "pinned (plan again)")
        if assigned:
            return Verdict(Rule.ELIGIBLE, "assigned")
        pair = self.pair_verdict(reviewer, paper)
        if not pair.allowed:
            return pair
        _, _, cap, _ = self._demands
        reviews = self._demands[0]
        if loads[reviewer] >= cap[reviewer]:
            return Verdict(Rule.CAP_FULL, f"cap full ({int(loads[reviewer])}/{int(cap[reviewer])})")
        if counts[paper] >= reviews[paper]:
            return Verdict(Rule.PAPER_FULL, f"{self.noun} already has its reviews")
        others = [j for j in on_paper if j != reviewer]
        m = self.session.policy.max_per_institution
        if m is not None:
            inst, _ = self._institutions
            mine = int(inst[reviewer])
            same = sum(1 for j in others if inst[j] == mine) if mine >= 0 else 0
            if mine >= 0 and same >= m:
                where = self.session.reviewers[reviewer].institution.strip()
                return Verdict(
                    Rule.INSTITUTION_LIMIT,
                    f"institution limit ({same} from {where} on this {self.noun}, max {m})",
                )
        if self.session.policy.senior_hard:
            need, senior = self._seniors
            if not senior[reviewer]:
                juniors = sum(1 for j in others if not senior[j]) + 1
                if reviews[paper] - juniors < need[paper]:
                    return Verdict(
                        Rule.SENIOR_SEATS,
                        f"seats left are for seniors ({int(need[paper])} needed)",
                    )
        if self.score(reviewer, paper) is None:
            return Verdict(Rule.ELIGIBLE, "unscored (counts as 0)")
        return Verdict(Rule.ELIGIBLE, "eligible, not chosen")

    def standing(
        self,
        reviewer: int,
        paper: int,
        loads: np.ndarray,
        counts: np.ndarray,
        assigned: bool,
        pinned: bool,
        on_paper: Iterable[int] = (),
    ) -> str:
        """Why a pair is or is not in a plan, in the chair's words (see `verdict`)."""
        return self.verdict(
            reviewer, paper, loads, counts, assigned=assigned, pinned=pinned, on_paper=on_paper
        ).text

    def plan_keep(
        self, reviewer: np.ndarray, paper: np.ndarray, score: np.ndarray, pinned: np.ndarray
    ) -> np.ndarray:
        """Which assignments of an existing plan survive the session's rules now.

        Pairs a pair rule forbids go (pins keep their exemptions); then, per reviewer over cap
        (plus allowed overload), per paper over its reviews and per (paper, institution) over
        `max_per_institution`, the weakest go: pins are kept first, then higher scores, then
        earlier rows. The hard senior rule is not trimmed for: removing pairs cannot add seniors.
        """
        reviewer = np.asarray(reviewer, dtype=np.int64)
        paper = np.asarray(paper, dtype=np.int64)
        score = np.asarray(score, dtype=np.float64)
        pinned = np.asarray(pinned, dtype=bool)
        keep = ~self.forbidden(reviewer, paper)
        reviews = self._demands[0]
        _trim(keep, reviewer, self._allowed_load, score, pinned)
        _trim(keep, paper, reviews, score, pinned)
        m = self.session.policy.max_per_institution
        if m is not None:
            inst, names = self._institutions
            group = np.where(inst[reviewer] >= 0, paper * max(len(names), 1) + inst[reviewer], -1)
            limit = np.full(int(group.max(initial=-1)) + 1, m, dtype=np.int64)
            inside = group >= 0
            sub = keep[inside]
            _trim(sub, group[inside], limit, score[inside], pinned[inside])
            keep[inside] = sub
        return keep

    # -- pins ------------------------------------------------------------------------------

    def pin_problems(self, pins: Sequence[PairRule] | None = None) -> list[str]:
        """Why these pins (the session's by default) cannot all stand, in the planner's words;
        empty when they can."""
        s = self.session
        pins = list(s.pins if pins is None else pins)
        if not pins:
            return []
        _, _, cap, _ = self._demands
        reviews = self._demands[0]
        problems: list[str] = []
        pin_r, pin_p = _index_pairs(s, pins)
        _, pin_score = self.scores_of(pin_r, pin_p)
        low, no_topic = self._score_and_topic(pin_r, pin_p, pin_score)
        for k, pin in enumerate(pins):
            j, i = int(pin_r[k]), int(pin_p[k])
            where = f"pins.{k}: pin ({pin.reviewer}, {pin.paper})"
            if (j, i) in self.conflict_reasons:
                problems.append(
                    f"{where} is a conflict of interest ({self.conflict_reasons[(j, i)]}); refused"
                )
            elif s.reviewers[j].withdrawn:
                problems.append(f"{where}: reviewer {pin.reviewer} has withdrawn")
            elif s.papers[i].withdrawn:
                problems.append(f"{where}: {self.noun} {pin.paper} has been withdrawn")
            elif (j, i) in self._blocked[0]:
                problems.append(f"{where} is blocked")
            elif low[k]:
                problems.append(
                    f"{where} scores {pin_score[k]:g}, below the policy's min_score "
                    f"{s.policy.min_score:g}; refused"
                )
            elif no_topic[k]:
                problems.append(
                    f"{where}: reviewer and {self.noun} share no topic and the policy requires "
                    "one; refused"
                )
        per_reviewer = _first_seen_counts(pin_r)
        per_paper = _first_seen_counts(pin_p)
        for j, count in per_reviewer.items():
            if count > cap[j]:
                problems.append(
                    f"pins: reviewer {s.reviewers[j].id} has {count} pins but a cap of {cap[j]}"
                )
        for i, count in per_paper.items():
            if count > reviews[i]:
                problems.append(
                    f"pins: {self.noun} {s.papers[i].id} has {count} pins but needs only "
                    f"{reviews[i]} reviews"
                )
        problems += self._pin_institution_problems(pin_r, pin_p)
        problems += self._pin_senior_problems(pin_r, pin_p, reviews)
        return problems

    def _pin_institution_problems(self, reviewer: np.ndarray, paper: np.ndarray) -> list[str]:
        """Pins that put more reviewers of one institution on a paper than the policy allows."""
        m = self.session.policy.max_per_institution
        if m is None:
            return []
        inst, names = self._institutions
        counts: dict[tuple[int, int], int] = {}
        for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
            if inst[j] >= 0:
                counts[(i, int(inst[j]))] = counts.get((i, int(inst[j])), 0) + 1
        return [
            f"pins: {self.noun} {self.session.papers[i].id} has {c} pinned reviewers from "
            f"{names[g]!r}, more than max_per_institution {m}; refused"
            for (i, g), c in sorted(counts.items())
            if c > m
        ]

    def _pin_senior_problems(
        self, reviewer: np.ndarray, paper: np.ndarray, reviews: np.ndarray
    ) -> list[str]:
        """Under a hard senior rule: pins of non-seniors that leave too few seats for seniors."""
        if not self.session.policy.senior_hard:
            return []
        need, senior = self._seniors
        juniors: dict[int, int] = {}
        for j, i in zip(reviewer.tolist(), paper.tolist(), strict=True):
            if not senior[j]:
                juniors[i] = juniors.get(i, 0) + 1
        return [
            f"pins: {self.noun} {self.session.papers[i].id} has {c} pinned non-senior reviewers, "
            f"leaving {reviews[i] - c} of {reviews[i]} seats for the {need[i]} seniors it must "
            "have; refused"
            for i, c in sorted(juniors.items())
            if reviews[i] - c < need[i]
        ]

    def check_pins(self) -> None:
        """Raise PlanInputError naming every pin a hard rule forbids."""
        problems = self.pin_problems()
        if problems:
            raise PlanInputError(problems)


def _first_seen_counts(values: np.ndarray) -> dict[int, int]:
    """Occurrences of each value, in order of first appearance (the order problems are told)."""
    counts: dict[int, int] = {}
    for v in values.tolist():
        counts[v] = counts.get(v, 0) + 1
    return counts


def _trim(
    keep: np.ndarray, owner: np.ndarray, limit: np.ndarray, score: np.ndarray, pinned: np.ndarray
) -> None:
    """Drop kept rows beyond `limit[owner]` per owner, weakest first (pins, then score, win)."""
    rows = np.flatnonzero(keep)
    if len(rows) == 0:
        return
    mine = owner[rows]
    # lexsort is stable and sorts by its last key first: owner, then pins, then higher score.
    order = np.lexsort((-score[rows], ~pinned[rows], mine))
    sorted_owner = mine[order]
    rank = np.arange(len(order)) - np.searchsorted(sorted_owner, sorted_owner, side="left")
    keep[rows[order[rank >= limit[sorted_owner]]]] = False


def candidate_pairs(session: Session) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(reviewer, paper, score) arrays of a session's candidates (see
    `PairRules.candidate_pairs`)."""
    return PairRules(session).candidate_pairs()

