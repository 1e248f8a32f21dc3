"""What the screens show, derived from a session and its plan; no widgets, no solving.

`Facts` is rebuilt after every change. It only reads the session and the current plan: loads,
review counts, the people on each paper, and for any pair the reason the plan could not or did
not use it. Plans themselves come from the Workspace.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from review_alloc.model import Session
from review_alloc.plan.figures import active_demands
from review_alloc.plan.report import Gap, LoadIssue, find_gaps, load_issues
from review_alloc.plan.rules import PIN_REFUSED, PairRules, Rule, Verdict


@dataclass(frozen=True)
class Candidate:
    """One (reviewer, paper) pair seen from the paper or the reviewer, with its standing."""

    reviewer: int
    paper: int
    score: float | None
    status: str
    """'assigned', 'pinned', or the reason the pair is not in the plan."""
    rule: Rule = Rule.ELIGIBLE
    """The rule that keeps the pair out of the plan (`ELIGIBLE` when none does)."""
    lead: bool = False
    """The reviewer leads the paper's discussion in the current plan."""

    @property
    def usable(self) -> bool:
        """Whether a pin could be placed on this pair (no pair rule refuses one)."""
        return self.rule not in PIN_REFUSED


@dataclass
class Facts:
    """Per-paper and per-reviewer figures of a session and its current plan."""

    session: Session
    loads: np.ndarray
    counts: np.ndarray
    reviews: np.ndarray
    minimum: np.ndarray
    cap: np.ndarray
    floor: np.ndarray
    assigned_of_paper: list[list[tuple[int, float]]]
    assigned_of_reviewer: list[list[tuple[int, float]]]
    conflict_reason: dict[tuple[int, int], str]
    blocked: set[tuple[int, int]]
    pinned: set[tuple[int, int]]
    pair_keys: np.ndarray = field(repr=False)
    pair_values: np.ndarray = field(repr=False)
    rules: PairRules = field(repr=False)
    """The session's rules, asked for every pair's standing."""
    lead_of_paper: list[int | None] = field(default_factory=list)
    """The reviewer (index) who leads each paper's discussion in the plan, or None."""
    led_by_reviewer: list[list[int]] = field(default_factory=list)
    """The papers (indices) each reviewer leads in the plan, in session order."""
    probability_keys: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))
    """For a randomised plan: reviewer * papers + paper of every pair with a chance, sorted."""
    probability_values: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @classmethod
    def of(
        cls, session: Session, previous: Facts | None = None, *, rules: PairRules | None = None
    ) -> Facts:
        """Compute the facts of `session` as it is now.

        Conflicts, the sorted score table and the other facts of the rules are taken over from
        `previous` when the lists they depend on are the very same objects (a pin, a block or a
        plan leaves them alone), which spares a large session most of the work of a refresh;
        `rules` (the Workspace's own, `Workspace.rules()`) is used as it is when given.
        """
        n_p, n_r = len(session.papers), len(session.reviewers)
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        by_paper: list[list[tuple[int, float]]] = [[] for _ in range(n_p)]
        by_reviewer: list[list[tuple[int, float]]] = [[] for _ in range(n_r)]
        lead_of: list[int | None] = [None] * n_p
        plan = session.plan
        for a in plan.assignments if plan else ():
            i, j = paper_at[a.paper], reviewer_at[a.reviewer]
            by_paper[i].append((j, a.score))
            by_reviewer[j].append((i, a.score))
            if a.lead:
                lead_of[i] = j
        led: list[list[int]] = [[] for _ in range(n_r)]
        for i, j in enumerate(lead_of):
            if j is not None:
                led[j].append(i)
        loads = np.array([len(x) for x in by_reviewer], dtype=np.int64)
        counts = np.array([len(x) for x in by_paper], dtype=np.int64)
        reviews, minimum, cap, floor = active_demands(session)
        if rules is None or rules.session is not session:
            rules = PairRules.renewed(session, previous.rules if previous is not None else None)
        pair_keys, pair_values = rules.sorted_scores()
        prob_keys, prob_values = _probabilities(session)
        return cls(
            session=session,
            loads=loads,
            counts=counts,
            reviews=reviews,
            minimum=minimum,
            cap=cap,
            floor=floor,
            assigned_of_paper=by_paper,
            assigned_of_reviewer=by_reviewer,
            conflict_reason=rules.conflict_reasons,
            blocked=rules.blocked_pairs(),
            pinned=rules.pinned_pairs(),
            pair_keys=pair_keys,
            pair_values=pair_values,
            rules=rules,
            lead_of_paper=lead_of,
            led_by_reviewer=led,
            probability_keys=prob_keys,
            probability_values=prob_values,
        )

    # -- single figures -------------------------------------------------------------------

    def score(self, reviewer: int, paper: int) -> float | None:
        """The score of a pair, or None when the table has no row for it."""
        return self.rules.score(reviewer, paper)

    @property
    def randomised(self) -> bool:
        """Whether the current plan was drawn at random (pairs have probabilities)."""
        plan = self.session.plan
        return plan is not None and plan.draw is not None

    def probability(self, reviewer: int, paper: int) -> float | None:
        """The pair's probability in the randomised plan's draw (0 when it had no chance);
        None when the plan is not a random draw."""
        if not self.randomised:
            return None
        key = reviewer * max(len(self.session.papers), 1) + paper
        at = int(np.searchsorted(self.probability_keys, key))
        if at < len(self.probability_keys) and self.probability_keys[at] == key:
            return float(self.probability_values[at])
        return 0.0

    def paper_status(self, i: int) -> str:
        """A short word for a paper's coverage, readable without colour."""
        if self.session.papers[i].withdrawn:
            return "withdrawn"
        if self.session.plan is None:
            return "unplanned"
        got, want, need = int(self.counts[i]), int(self.reviews[i]), int(self.minimum[i])
        if got < need:
            return f"BELOW MIN {need - got}"
        if got < want:
            return f"short {want - got}"
        return "covered"

    def reviewer_status(self, j: int) -> str:
        """A short word for a reviewer's load against cap and floor, readable without colour."""
        if self.session.reviewers[j].withdrawn:
            return "withdrawn"
        load, cap, floor = int(self.loads[j]), int(self.cap[j]), int(self.floor[j])
        if load > cap:
            return f"OVER CAP {load - cap}"
        if load == cap:
            return "at cap"
        if load < floor:
            return f"below floor {floor - load}"
        return f"room {cap - load}"

    # -- pairs ----------------------------------------------------------------------------

    def pair_verdict(self, reviewer: int, paper: int) -> Verdict:
        """The rule that decides whether a pair is in the plan, and the chair's words for it."""
        on_paper = [j for j, _ in self.assigned_of_paper[paper]]
        return self.rules.verdict(
            reviewer,
            paper,
            self.loads,
            self.counts,
            assigned=reviewer in on_paper,
            pinned=(reviewer, paper) in self.pinned,
            on_paper=on_paper,
        )

    def leads(self, reviewer: int, paper: int) -> bool:
        """Whether `reviewer` leads `paper`'s discussion in the current plan."""
        return bool(self.lead_of_paper) and self.lead_of_paper[paper] == reviewer

    def pair_status(self, reviewer: int, paper: int) -> str:
        """Why a pair is or is not in the plan, in the chair's words."""
        return self.pair_verdict(reviewer, paper).text

    def _candidate(self, reviewer: int, paper: int, score: float | None) -> Candidate:
        verdict = self.pair_verdict(reviewer, paper)
        return Candidate(
            reviewer, paper, score, verdict.text, verdict.rule, self.leads(reviewer, paper)
        )

    @property
    def noun(self) -> str:
        """'proposal' for a panel, 'paper' otherwise."""
        return self.session.noun

    def candidates_of_paper(self, paper: int, limit: int = 12) -> list[Candidate]:
        """The paper's assigned people, then the best-scored others with why each is unused."""
        out = [
            self._candidate(j, paper, score)
            for j, score in sorted(self.assigned_of_paper[paper], key=lambda x: -x[1])
        ]
        taken = {c.reviewer for c in out}
        n_p = max(len(self.session.papers), 1)
        rows = np.flatnonzero(self.pair_keys % n_p == paper)
        ranked = rows[np.argsort(-self.pair_values[rows], kind="stable")]
        for k in ranked:
            j = int(self.pair_keys[k] // n_p)
            if j in taken:
                continue
            out.append(self._candidate(j, paper, float(self.pair_values[k])))
            taken.add(j)
            if len(out) >= len(self.assigned_of_paper[paper]) + limit:
                return out
        if self.session.policy.unscored == "exclude":
            return out
        # Too few scored rows: unscored pairs are eligible at score 0, so show those people too.
        for j in range(len(self.session.reviewers)):
            if len(out) >= len(self.assigned_of_paper[paper]) + limit:
                break
            if j not in taken:
                out.append(self._candidate(j, paper, None))
                taken.add(j)
        return out

    def candidates_of_reviewer(self, reviewer: int, limit: int = 12) -> list[Candidate]:
        """The reviewer's assigned papers, then their best-scored others and why each is unused."""
        out = [
            self._candidate(reviewer, i, score)
            for i, score in sorted(self.assigned_of_reviewer[reviewer], key=lambda x: -x[1])
        ]
        taken = {c.paper for c in out}
        n_p = max(len(self.session.papers), 1)
        lo = int(np.searchsorted(self.pair_keys, reviewer * n_p))
        hi = int(np.searchsorted(self.pair_keys, (reviewer + 1) * n_p))
        span = np.arange(lo, hi)
        ranked = span[np.argsort(-self.pair_values[lo:hi], kind="stable")]
        for k in ranked:
            i = int(self.pair_keys[k] % n_p)
            if i in taken:
                continue
            out.append(self._candidate(reviewer, i, float(self.pair_values[k])))
            taken.add(i)
            if len(out) >= len(self.assigned_of_reviewer[reviewer]) + limit:
                break
        return out

    def gaps(self) -> list[Gap]:
        """The papers short of reviews in the current plan (none without a plan)."""
        plan = self.session.plan
        return find_gaps(self.session, plan) if plan is not None else []

    def load_issues(self) -> tuple[list[LoadIssue], list[LoadIssue]]:
        """(reviewers above cap, active reviewers below floor) in the current plan."""
        plan = self.session.plan
        return load_issues(self.session, plan) if plan is not None else ([], [])

    # -- charts ---------------------------------------------------------------------------

    def load_bands(self) -> list[tuple[str, int]]:
        """Active reviewers counted by load against cap, in bands a chair reads at a glance."""
        bands = {"idle": 0, "< half cap": 0, "< cap": 0, "at cap": 0}
        bands["over cap"] = 0
        for j, r in enumerate(self.session.reviewers):
            if r.withdrawn:
                continue
            load, cap = int(self.loads[j]), int(self.cap[j])
            if load > cap:
                bands["over cap"] += 1
            elif load == cap:
                bands["at cap"] += 1
            elif load == 0:
                bands["idle"] += 1
            elif 2 * load < cap:
                bands["< half cap"] += 1
            else:
                bands["< cap"] += 1
        return list(bands.items())

    def score_histogram(self, bins: int = 8) -> list[tuple[str, int]]:
        """Assigned pairs counted by score, in equal-width bins from 0 to the highest score."""
        plan = self.session.plan
        if plan is None or not plan.assignments:
            return []
        values = np.array([a.score for a in plan.assignments], dtype=np.float64)
        top = float(values.max()) or 1.0
        counts, edges = np.histogram(values, bins=bins, range=(0.0, top))
        return [(f"{edges[k]:.2f}-{edges[k + 1]:.2f}", int(c)) for k, c in enumerate(counts)]

    def topic_coverage(self) -> list[tuple[str, int, int]]:
        """(topic, reviews placed, reviews wanted) over active papers, topics by name."""
        placed: dict[str, int] = {}
        wanted: dict[str, int] = {}
        for i, p in enumerate(self.session.papers):
            if p.withdrawn:
                continue
            for topic in p.topics or ["(no topic)"]:
                placed[topic] = placed.get(topic, 0) + int(min(self.counts[i], self.reviews[i]))
                wanted[topic] = wanted.get(topic, 0) + int(self.reviews[i])
        return [(t, placed[t], wanted[t]) for t in sorted(wanted)]


def _probabilities(session: Session) -> tuple[np.ndarray, np.ndarray]:
    """The draw's pair probabilities as sorted keys and values (empty for other plans).

    Positions are those of the session the draw was made from; entities are only ever
    appended, so positions past today's lists are dropped and the rest still match."""
    plan = session.plan
    if plan is None or plan.draw is None:
        return np.zeros(0, np.int64), np.zeros(0)
    table = plan.draw.probabilities
    n_r, n_p = len(session.reviewers), len(session.papers)
    reviewer = table.reviewer.astype(np.int64)
    paper = table.paper.astype(np.int64)
    keep = (reviewer < n_r) & (paper < n_p)
    keys = reviewer[keep] * max(n_p, 1) + paper[keep]
    order = np.argsort(keys, kind="stable")
    return keys[order], np.asarray(table.value, dtype=np.float64)[keep][order]
