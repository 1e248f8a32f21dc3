"""The independent plan checker: every hard rule, the figures, and the optimality certificate.

It trusts nothing the engine returned except the dual potentials, and those it verifies: it
rebuilds the arc flows from the plan's assignments alone and checks the reduced-cost conditions.
It reads the chair's rules from the session's rows itself, never through `plan.rules`, so that
a mistake there cannot pass unseen (the tests compare the two derivations).

A re-plan's certificate is checked in full as well, every arc's conditions, but a large
network's pair block goes through one fused pass (`plan.check_pass`) instead of numpy's passes:
on the L benchmarks that reads 3 M arcs in a few milliseconds, less than finding the arcs that
changed since the previous check took (comparing old and new bounds and costs reads more than
checking the new ones). From the previous check (`CheckState`) it takes only where the previous
plan's rows sat among the network's pairs, each confirmed by its own key.

The hard rules build on the previous check (`CheckedRows`): every row of the plan is read each
time, and the rules that are one vectorised pass given the session's sorted rule tables
(conflicts, withdrawals, blocks, pins, caps, reviews, institutions, seniors, leads, figures) are
checked on every row. Only what costs a pass over the session's entities or its score table
is taken from the previous check, and only where its inputs are the same: the per-entity values
of reviewers and papers equal to the previous session's (value equality, not the planner's word),
a row's score-table lookup and shared topic where the row, its reviewer and its paper are
unchanged and the score table is equal, the conflict set where the declared conflicts are
equal and no changed entity changed a field the conflict inference may read. An entity that is
the very object of the previous session counts as equal without reading it: sessions are never
changed in place (a change copies what it changes, as `plan.patch` relies on too).
"""

from __future__ import annotations

from dataclasses import dataclass
from operator import attrgetter, is_not

import numpy as np

from review_alloc.flow import FlowCheckError, check_cost_certificate
from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs, normalise_institution
from review_alloc.plan.errors import PlanCheckError
from review_alloc.plan.figures import (
    active_demands,
    assignment_arrays,
    loads_and_counts,
    plan_figures,
)
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import contains, key_order, pair_keys, positions_in
from review_alloc.plan.seniors import paper_senior_need

_MAX_LISTED = 20


@dataclass(frozen=True)
class Certified:
    """Where a passed certificate check found the plan's pairs on its network, so that the next
    check of a network of the same pairs finds a re-plan's rows there first."""

    network: PlanNetwork
    used: np.ndarray
    """Positions, in the pair block, of the pairs carrying flow (in the plan's row order)."""
    keys: np.ndarray
    """The network's pair keys, sorted (shared by every network of the same pairs)."""
    order: np.ndarray | None
    """Pair positions of `keys` when the pairs are not in key order, else None."""
    row_keys: np.ndarray | None = None
    """Paper-major keys `paper * n_reviewers + reviewer` of the plan's rows when they came in
    increasing order (a plan's rows go by paper, then reviewer), else None."""
    row_pairs: np.ndarray | None = None
    """Pair position of each of `row_keys`."""


@dataclass(frozen=True, eq=False)
class EntityValues:
    """Per-entity values the hard rules read, by position, as the checker derived them."""

    reviews: np.ndarray
    minimum: np.ndarray
    cap: np.ndarray
    floor: np.ndarray
    allowance: np.ndarray
    """Papers above cap each reviewer may take (0 if withdrawn)."""
    need: np.ndarray | None
    """Seniors wanted per paper, when the hard senior rule is on."""
    gone_reviewer: np.ndarray
    """Per reviewer: withdrawn."""
    gone_paper: np.ndarray
    """Per paper: withdrawn."""

    def __post_init__(self) -> None:
        # Kept in a check state and copied by the next check: nobody may write into them.
        for array in (
            self.reviews, self.minimum, self.cap, self.floor, self.allowance,
            self.gone_reviewer, self.gone_paper,
        ):
            array.flags.writeable = False
        if self.need is not None:
            self.need.flags.writeable = False


@dataclass(frozen=True, eq=False)
class CheckedRows:
    """What a passed check read per row and per entity, for the next check of a session with
    the same entities to read again only what changed."""

    session: Session
    """The session checked: the next check compares its entities and tables with these."""
    keys: np.ndarray
    """Paper-major keys `paper * n_reviewers + reviewer` of the plan's rows, sorted."""
    score: np.ndarray
    """Per key: the row's score, which the session's score table confirmed."""
    has_score: np.ndarray
    """Per key: the score table holds the pair."""
    topic: np.ndarray | None
    """Per key: the pair shares a topic (when the policy requires one)."""
    score_keys: np.ndarray
    score_values: np.ndarray
    """The session's score table by sorted pair key `reviewer * n_papers + paper`."""
    conflict_keys: np.ndarray
    """The conflict set's sorted pair keys."""
    entities: EntityValues

    def __post_init__(self) -> None:
        for array in (
            self.keys, self.score, self.has_score, self.conflict_keys, self.score_keys,
            self.score_values,
        ):
            array.flags.writeable = False
        if self.topic is not None:
            self.topic.flags.writeable = False


@dataclass(frozen=True)
class CheckState:
    """What a passed check established, for the next check of a re-plan to build on."""

    conflicts: ConflictSet
    """The conflict set the check derived (see `check_plan`'s `conflicts`)."""
    certified: Certified | None = None
    """The certificate's state, when the check had potentials."""
    rows: CheckedRows | None = None
    """The hard rules' per-row and per-entity state."""


CONFLICT_FREE_REVIEWER_FIELDS = frozenset({"cap", "floor", "overload", "withdrawn", "senior"})
"""Reviewer fields the conflict inference never reads: a change to them alone keeps the set."""

CONFLICT_FREE_PAPER_FIELDS = frozenset({"reviews", "min_reviews", "senior_min", "withdrawn"})
"""Paper fields the conflict inference never reads."""


@dataclass(frozen=True)
class _Prior:
    """An earlier check's state and what changed since, for a session of the same entities."""

    rows: CheckedRows
    reviewers: np.ndarray
    """Positions of reviewers not equal to the earlier session's."""
    papers: np.ndarray
    """Positions of papers not equal to the earlier session's."""
    same_scores: bool
    same_conflicts: bool


def _changed_entities(old: list, new: list) -> np.ndarray | None:
    """Positions whose entity differs in value; None when the lists differ in length or ids."""
    if len(old) != len(new):
        return None
    # The identity test runs over whole lists in C (a re-plan's session shares nearly every
    # entity object with the previous one); only the others are compared field by field.
    other = np.flatnonzero(
        np.fromiter(map(is_not, old, new), dtype=bool, count=len(new))
    ).tolist()
    changed = [k for k in other if old[k].__dict__ != new[k].__dict__]
    if any(old[k].id != new[k].id for k in changed):
        return None
    return np.asarray(changed, dtype=np.int64)


def _only_in(old: object, new: object, fields: frozenset[str]) -> bool:
    """Whether two entities differ only in `fields`."""
    a, b = old.__dict__, new.__dict__
    return a.keys() == b.keys() and all(a[k] == b[k] for k in a if k not in fields)


def _prior(session: Session, rows: CheckedRows | None) -> _Prior | None:
    """What changed since the check that left `rows`, when its state can be built on."""
    if rows is None:
        return None
    old = rows.session
    if not (old.policy is session.policy or old.policy == session.policy):
        return None
    reviewers = _changed_entities(old.reviewers, session.reviewers)
    papers = _changed_entities(old.papers, session.papers)
    if reviewers is None or papers is None:
        return None
    a, b = old.scores, session.scores
    same_scores = a is b or (
        np.array_equal(a.reviewer, b.reviewer)
        and np.array_equal(a.paper, b.paper)
        and np.array_equal(a.value, b.value)
    )
    same_conflicts = (
        (old.conflicts is session.conflicts or old.conflicts == session.conflicts)
        and all(
            _only_in(old.reviewers[j], session.reviewers[j], CONFLICT_FREE_REVIEWER_FIELDS)
            for j in reviewers.tolist()
        )
        and all(
            _only_in(old.papers[i], session.papers[i], CONFLICT_FREE_PAPER_FIELDS)
            for i in papers.tolist()
        )
    )
    return _Prior(rows, reviewers, papers, same_scores, same_conflicts)


def check_plan(
    session: Session,
    plan: Plan,
    potentials: np.ndarray | None,
    *,
    network: PlanNetwork | None = None,
    earlier: Plan | None = None,
    conflicts: ConflictSet | None = None,
    base: CheckState | None = None,
) -> CheckState:
    """Raise PlanCheckError unless the plan keeps every rule and, given potentials, is optimal.

    A re-plan's certificate is checked against the network with `earlier`'s keep tier.
    `conflicts` is the session's conflict set when the caller already derived it. `base` is
    the state an earlier passed check returned: the rules read again only what changed since
    (see the module's notes), and where `network` has the same arcs as the one certified
    there, only what changed is certified again (anything else is checked in full). Returns
    this check's state for the next one.
    """
    arrays = assignment_arrays(session, plan.assignments)
    prior = _prior(session, base.rows if base is not None else None)
    conflict_keys = None
    if conflicts is None and prior is not None and prior.same_conflicts and base is not None:
        conflicts, conflict_keys = base.conflicts, prior.rows.conflict_keys
    if conflicts is None:
        conflicts = conflict_pairs(session)
    problems, rows = _hard_rule_problems(
        session, plan, *arrays, conflicts=conflicts, prior=prior, conflict_keys=conflict_keys
    )
    certified = None
    if not problems and potentials is not None:
        if network is None:
            network = build_network(session, earlier=earlier)
        earlier_certified = base.certified if base is not None else None
        problems, certified = _certificate_problems(
            arrays[0], arrays[1], potentials, network, earlier_certified
        )
    if problems:
        raise PlanCheckError(problems[:_MAX_LISTED])
    return CheckState(conflicts=conflicts, certified=certified, rows=rows)


def _positions(keys: np.ndarray, table: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """`positions_in` for keys in any order: a plan's rows go by paper, the tables by reviewer,
    and a binary search of millions of keys is several times faster with its needles sorted
    (each search starts where the last one ended, in cache)."""
    order = np.argsort(keys, kind="stable")
    found, at = positions_in(keys[order], table)
    out_found = np.empty_like(found)
    out_at = np.empty_like(at)
    out_found[order] = found
    out_at[order] = at
    return out_found, out_at


def _rule_keys(session: Session, rows: list, n_p: int) -> np.ndarray:
    """Pair keys of pin or block rows whose ids the session knows (others cannot match)."""
    paper_at = session.paper_index()
    reviewer_at = session.reviewer_index()
    known = [
        (reviewer_at[r.reviewer], paper_at[r.paper])
        for r in rows
        if r.reviewer in reviewer_at and r.paper in paper_at
    ]
    if not known:
        return np.zeros(0, dtype=np.int64)
    j, i = np.array(known, dtype=np.int64).T
    return pair_keys(j, i, n_p)


@dataclass(frozen=True)
class PairFlags:
    """Per assignment, each pair rule it breaks, as the checker reads the session's rows.

    `unscored`, `below_min_score` and `no_shared_topic` already spare pinned pairs.
    """

    conflicted: np.ndarray
    gone_reviewer: np.ndarray
    gone_paper: np.ndarray
    blocked: np.ndarray
    unscored: np.ndarray
    below_min_score: np.ndarray
    no_shared_topic: np.ndarray
    pinned: np.ndarray
    expected_score: np.ndarray
    """The session's score of each pair (0 where unscored)."""
    conflicts: ConflictSet

    def any(self) -> np.ndarray:
        """Per pair: does it break any pair rule?"""
        return (
            self.conflicted
            | self.gone_reviewer
            | self.gone_paper
            | self.blocked
            | self.unscored
            | self.below_min_score
            | self.no_shared_topic
        )


def pair_flags(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    conflicts: ConflictSet | None = None,
) -> PairFlags:
    """The pair rules each (reviewer, paper, score) breaks, derived by the checker alone
    (`conflicts`: the session's conflict set when already derived)."""
    return _flag_pairs(session, reviewer, paper, score, conflicts)[0]


@dataclass(frozen=True)
class _Lookups:
    """What `_flag_pairs` looked up per row, and the sorted tables it looked them up in."""

    has_score: np.ndarray
    topic: np.ndarray | None
    score_keys: np.ndarray
    score_values: np.ndarray
    conflict_keys: np.ndarray


def _flag_pairs(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    conflicts: ConflictSet | None = None,
    prior: _Prior | None = None,
    conflict_keys: np.ndarray | None = None,
    gone: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[PairFlags, _Lookups]:
    """`pair_flags`, with the score-table lookups and shared topics of rows the `prior` check
    saw unchanged (same pair and score, reviewer and paper equal, same table) taken from it."""
    reviewer = np.asarray(reviewer, dtype=np.int64)
    paper = np.asarray(paper, dtype=np.int64)
    score = np.asarray(score, dtype=np.float64)
    n_p = max(len(session.papers), 1)
    keys = pair_keys(reviewer, paper, n_p)
    if conflicts is None:
        conflicts = conflict_pairs(session)
    if conflict_keys is None:
        conflict_keys = conflicts.keys(n_p)
    gone_r, gone_p = _withdrawn(session) if gone is None else gone
    policy = session.policy
    known = np.zeros(len(keys), dtype=bool)
    at = np.zeros(len(keys), dtype=np.int64)
    if prior is not None and len(prior.rows.keys):
        rows = prior.rows
        found, at = positions_in(_row_keys(session, reviewer, paper), rows.keys)
        moved_r = np.zeros(len(session.reviewers), dtype=bool)
        moved_r[prior.reviewers] = True
        moved_p = np.zeros(len(session.papers), dtype=bool)
        moved_p[prior.papers] = True
        known = found & (rows.score[at] == score) & ~moved_r[reviewer] & ~moved_p[paper]
    if prior is not None and prior.same_scores:
        s_keys, s_values = prior.rows.score_keys, prior.rows.score_values
        scored = known
    else:
        table = session.scores
        s_keys, s_values = key_order(pair_keys(table.reviewer, table.paper, n_p), table.value)
        scored = np.zeros(len(keys), dtype=bool)
    has_score = np.zeros(len(keys), dtype=bool)
    expected = score.copy()
    look = np.flatnonzero(~scored)
    if prior is not None:
        # The earlier check confirmed these rows' scores against the same table.
        has_score[scored] = prior.rows.has_score[at[scored]]
    found_score, pos = _positions(keys[look], s_keys)
    has_score[look] = found_score
    expected[look] = np.where(found_score, s_values[pos] if len(s_keys) else 0.0, 0.0)
    pinned = contains(keys, _rule_keys(session, session.pins, n_p))
    low = np.zeros(len(keys), dtype=bool)
    if policy.min_score is not None:
        low = score < policy.min_score - 1e-12
    topic = None
    no_topic = np.zeros(len(keys), dtype=bool)
    if policy.require_shared_topic:
        topic = np.zeros(len(keys), dtype=bool)
        if prior is not None and prior.rows.topic is not None:
            topic[known] = prior.rows.topic[at[known]]
        fresh = np.flatnonzero(~known) if prior is not None else np.arange(len(keys))
        topic[fresh] = _shares_topic(session, reviewer[fresh], paper[fresh])
        no_topic = ~topic
    flags = PairFlags(
        conflicted=contains(keys, conflict_keys),
        gone_reviewer=gone_r[reviewer],
        gone_paper=gone_p[paper],
        blocked=contains(keys, _rule_keys(session, session.blocks, n_p)),
        unscored=~has_score & ~pinned & (policy.unscored == "exclude"),
        below_min_score=low & ~pinned,
        no_shared_topic=no_topic & ~pinned,
        pinned=pinned,
        expected_score=expected,
        conflicts=conflicts,
    )
    return flags, _Lookups(has_score, topic, s_keys, s_values, conflict_keys)


def _row_keys(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """Paper-major pair keys: a plan's rows go by paper, then reviewer, so these increase."""
    return paper.astype(np.int64) * max(len(session.reviewers), 1) + reviewer


def _withdrawn(session: Session) -> tuple[np.ndarray, np.ndarray]:
    """Per reviewer and per paper: withdrawn."""
    withdrawn = attrgetter("withdrawn")
    n_r, n_p = len(session.reviewers), len(session.papers)
    return (
        np.fromiter(map(withdrawn, session.reviewers), dtype=bool, count=n_r),
        np.fromiter(map(withdrawn, session.papers), dtype=bool, count=n_p),
    )


def _entity_values(session: Session, prior: _Prior | None) -> EntityValues:
    """The per-entity values of `session`: those of the prior check's session, read again for
    the entities that differ from it, or a full pass without one."""
    policy = session.policy
    if prior is None:
        reviews, minimum, cap, floor = active_demands(session)
        need = paper_senior_need(session) if policy.senior_hard else None
        return EntityValues(
            reviews, minimum, cap, floor, overload_allowances(session), need, *_withdrawn(session)
        )
    old = prior.rows.entities
    if not len(prior.reviewers) and not len(prior.papers):
        return old
    reviews, minimum, cap, floor = (
        old.reviews.copy(), old.minimum.copy(), old.cap.copy(), old.floor.copy()
    )
    allowance = old.allowance.copy()
    need = None if old.need is None else old.need.copy()
    gone_r, gone_p = old.gone_reviewer.copy(), old.gone_paper.copy()
    for j in prior.reviewers.tolist():
        r = session.reviewers[j]
        gone_r[j] = r.withdrawn
        if r.withdrawn:
            cap[j] = floor[j] = allowance[j] = 0
        else:
            cap[j], floor[j] = session.reviewer_cap(j), session.reviewer_floor(j)
            allowance[j] = policy.overload_allowance if r.overload is None else r.overload
    for i in prior.papers.tolist():
        p = session.papers[i]
        gone_p[i] = p.withdrawn
        wanted = session.paper_reviews(i)
        if need is not None:
            own = policy.senior_min if p.senior_min is None else p.senior_min
            need[i] = 0 if p.withdrawn else min(own, wanted)
        if p.withdrawn:
            reviews[i] = minimum[i] = 0
        else:
            reviews[i], minimum[i] = wanted, session.paper_min_reviews(i)
    return EntityValues(reviews, minimum, cap, floor, allowance, need, gone_r, gone_p)


def _shares_topic(session: Session, reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    """Per pair: does the paper have a topic the reviewer has (case and spaces folded)?

    Whole-array work: one (reviewer, topic) key per reviewer topic, sorted; each pair is
    repeated once per topic of its paper and looked up among those keys.
    """
    code: dict[str, int] = {}

    def codes(topics: list[str]) -> list[int]:
        return sorted({code.setdefault(" ".join(t.split()).casefold(), len(code)) for t in topics})

    paper_codes = [codes(p.topics) for p in session.papers]
    reviewer_codes = [codes(r.topics) for r in session.reviewers]
    width = max(len(code), 1)
    known = np.sort(
        np.array(
            [j * width + t for j, ts in enumerate(reviewer_codes) for t in ts], dtype=np.int64
        )
    )
    sizes = np.array([len(ts) for ts in paper_codes], dtype=np.int64)
    flat = np.array([t for ts in paper_codes for t in ts], dtype=np.int64)
    starts = np.concatenate([[0], np.cumsum(sizes)])
    per_pair = sizes[paper] if len(paper) else np.zeros(0, dtype=np.int64)
    owner = np.repeat(np.arange(len(paper)), per_pair)
    offset = np.arange(len(owner)) - np.repeat(np.cumsum(per_pair) - per_pair, per_pair)
    topic = flat[starts[paper[owner]] + offset] if len(owner) else owner
    hit = contains(reviewer[owner] * width + topic, known)
    return np.bincount(owner[hit], minlength=len(paper)) > 0


def _hard_rule_problems(
    session: Session,
    plan: Plan,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    *,
    conflicts: ConflictSet | None = None,
    prior: _Prior | None = None,
    conflict_keys: np.ndarray | None = None,
) -> tuple[list[str], CheckedRows | None]:
    """Every hard rule's breaks (empty when none), and the state of a passed check."""
    problems: list[str] = []
    # Every test below is on whole arrays: a large plan has tens of thousands of assignments.
    for k in np.flatnonzero((paper < 0) | (reviewer < 0)).tolist():
        a = plan.assignments[k]
        if paper[k] < 0:
            problems.append(f"assignment {k}: unknown paper {a.paper!r}")
        if reviewer[k] < 0:
            problems.append(f"assignment {k}: unknown reviewer {a.reviewer!r}")
    if problems:
        return problems, None

    n_p = max(len(session.papers), 1)
    keys = pair_keys(reviewer, paper, n_p)
    rows_keys = _row_keys(session, reviewer, paper)
    # A plan's rows go by (paper, reviewer): strictly increasing keys hold no pair twice.
    ordered = len(rows_keys) < 2 or bool(np.all(rows_keys[1:] > rows_keys[:-1]))
    if not ordered:
        unique, seen = np.unique(keys, return_counts=True)
        for key in unique[seen > 1]:
            problems.append(
                f"pair ({_rid(session, key, n_p)}, {_pid(session, key, n_p)}) is assigned twice"
            )

    # The per-entity values first: the withdrawal flags come from them (read again only for
    # the entities that changed since the prior check).
    entities = _entity_values(session, prior)
    flags, lookups = _flag_pairs(
        session, reviewer, paper, score, conflicts, prior, conflict_keys,
        (entities.gone_reviewer, entities.gone_paper),
    )
    if (flags.conflicted | flags.gone_reviewer | flags.gone_paper).any():
        reasons = flags.conflicts.reason_of()
        for k in np.flatnonzero(
            flags.conflicted | flags.gone_reviewer | flags.gone_paper
        ).tolist():
            j, i = int(reviewer[k]), int(paper[k])
            if flags.conflicted[k]:
                problems.append(
                    f"conflicted pair ({session.reviewers[j].id}, {session.papers[i].id}) is "
                    f"assigned: {reasons[(j, i)]}"
                )
            if flags.gone_reviewer[k]:
                problems.append(f"withdrawn reviewer {session.reviewers[j].id} is assigned")
            if flags.gone_paper[k]:
                problems.append(f"withdrawn paper {session.papers[i].id} is assigned")
    for k in np.flatnonzero(flags.blocked).tolist():
        a = plan.assignments[k]
        problems.append(f"blocked pair ({a.reviewer}, {a.paper}) is assigned")
    if session.pins:
        paper_at, reviewer_at = session.paper_index(), session.reviewer_index()
        pin_keys = np.array(
            [
                reviewer_at[p.reviewer] * n_p + paper_at[p.paper]
                if p.reviewer in reviewer_at and p.paper in paper_at
                else -1
                for p in session.pins
            ],
            dtype=np.int64,
        )
        for k in np.flatnonzero(~contains(pin_keys, keys)).tolist():
            pin = session.pins[k]
            problems.append(f"pinned pair ({pin.reviewer}, {pin.paper}) is missing")

    expected = flags.expected_score
    for k in np.flatnonzero(~np.isclose(expected, score, rtol=0, atol=1e-9)):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) has score {a.score}, session says {expected[k]}"
        )
    for k in np.flatnonzero(flags.unscored):
        a = plan.assignments[k]
        problems.append(f"unscored pair ({a.reviewer}, {a.paper}) is assigned")

    loads, counts = loads_and_counts(session, reviewer, paper)
    demands = entities.reviews, entities.minimum, entities.cap, entities.floor
    reviews, _, cap, _ = demands
    allowed = cap + entities.allowance
    for j in np.flatnonzero(loads > allowed):
        problems.append(
            f"reviewer {session.reviewers[j].id} has load {loads[j]} above cap {cap[j]}"
            + (f" and allowed overload {allowed[j] - cap[j]}" if allowed[j] > cap[j] else "")
        )
    for i in np.flatnonzero(counts > reviews):
        problems.append(f"paper {session.papers[i].id} has {counts[i]} reviews, above {reviews[i]}")

    problems += _constraint_problems(session, plan, reviewer, paper, flags, entities.need)
    figures = plan_figures(session, reviewer, paper, score, demands=demands)
    if figures != plan.figures:
        problems.append(f"plan figures {plan.figures} differ from recomputed {figures}")
    if problems:
        return problems, None
    order = None if ordered else np.argsort(rows_keys, kind="stable")

    def by_key(values: np.ndarray) -> np.ndarray:
        return values.copy() if order is None else values[order]

    rows = CheckedRows(
        session=session,
        keys=by_key(rows_keys),
        score=by_key(np.asarray(score, dtype=np.float64)),
        has_score=by_key(lookups.has_score),
        topic=None if lookups.topic is None else by_key(lookups.topic),
        score_keys=lookups.score_keys,
        score_values=lookups.score_values,
        conflict_keys=lookups.conflict_keys,
        entities=entities,
    )
    return [], rows


def _constraint_problems(
    session: Session,
    plan: Plan,
    reviewer: np.ndarray,
    paper: np.ndarray,
    flags: PairFlags,
    need: np.ndarray | None = None,
) -> list[str]:
    """The policy's optional rules, read from the session's rows, not from the network
    (`need`: the seniors wanted per paper, when already derived)."""
    policy = session.policy
    problems: list[str] = []
    for k in np.flatnonzero(flags.below_min_score):
        a = plan.assignments[k]
        problems.append(
            f"pair ({a.reviewer}, {a.paper}) scores {a.score:g}, below min_score "
            f"{policy.min_score:g}"
        )
    for k in np.flatnonzero(flags.no_shared_topic):
        a = plan.assignments[k]
        problems.append(f"pair ({a.reviewer}, {a.paper}) shares no topic")
    if policy.max_per_institution is not None:
        names = [normalise_institution(r.institution) for r in session.reviewers]
        known = sorted(set(names) - {""})
        code_of = {name: k for k, name in enumerate(known)}
        code = np.array([code_of.get(name, -1) for name in names], dtype=np.int64)
        mine = code[reviewer] >= 0
        groups, per = np.unique(
            paper[mine] * max(len(known), 1) + code[reviewer[mine]], return_counts=True
        )
        # Sorted by (paper, institution name), as the codes follow the names' order.
        for group, c in zip(groups.tolist(), per.tolist(), strict=True):
            if c > policy.max_per_institution:
                i, name = divmod(group, max(len(known), 1))
                problems.append(
                    f"paper {session.papers[i].id} has {c} reviewers from {known[name]!r}, "
                    f"above max_per_institution {policy.max_per_institution}"
                )
    if policy.senior_hard:
        if need is None:
            need = paper_senior_need(session)
        senior = session.reviewer_senior_array()
        have = np.bincount(paper[senior[reviewer]], minlength=len(session.papers))
        for i in np.flatnonzero(have < need):
            problems.append(
                f"paper {session.papers[i].id} has {have[i]} senior reviewers, the hard rule "
                f"needs {need[i]}"
            )
    leads = np.fromiter(map(attrgetter("lead"), plan.assignments), dtype=bool, count=len(paper))
    if leads.any():
        per_lead = np.bincount(reviewer[leads], minlength=len(session.reviewers))
        for j in np.flatnonzero(per_lead > policy.max_leads):
            problems.append(
                f"reviewer {session.reviewers[j].id} leads {per_lead[j]} papers, above "
                f"max_leads {policy.max_leads}"
            )
        per_paper = np.bincount(paper[leads], minlength=len(session.papers))
        for i in np.flatnonzero(per_paper > 1):
            problems.append(f"paper {session.papers[i].id} has {per_paper[i]} leads")
    return problems


FUSED_PAIRS = 100_000
"""Fewest pair arcs for which a re-plan's certificate goes through the fused pass
(`_check_fused`); smaller networks take `check_cost_certificate` (numpy), a few milliseconds
there, and so never wait for the fused kernel's first compile."""


def _certificate_problems(
    reviewer: np.ndarray,
    paper: np.ndarray,
    potentials: np.ndarray,
    net: PlanNetwork,
    base: Certified | None = None,
) -> tuple[list[str], Certified | None]:
    n_p = max(net.n_papers, 1)
    same_pairs = (
        base is not None
        and base.network.pair_reviewer is net.pair_reviewer
        and base.network.pair_paper is net.pair_paper
        and base.network.n_papers == net.n_papers
    )
    if base is not None and same_pairs:
        # The same pairs: their sorted keys are the certified check's.
        net_keys, order = base.keys, base.order
    else:
        net_keys = pair_keys(net.pair_reviewer, net.pair_paper, n_p)
        # The builder emits pairs in key order; sort only a network that was built otherwise.
        increasing = len(net_keys) < 2 or bool(np.all(net_keys[1:] > net_keys[:-1]))
        order = None if increasing else np.argsort(net_keys)
        if order is not None:
            net_keys = net_keys[order]
    keys = pair_keys(reviewer, paper, n_p)
    by_paper = paper.astype(np.int64) * max(net.n_reviewers, 1) + reviewer
    rising = len(by_paper) < 2 or bool(np.all(by_paper[1:] > by_paper[:-1]))
    if base is not None and same_pairs and order is None:
        # Rows the certified plan held are among its used pairs: look them up there (a table
        # the size of a plan), and only the rest among all the network's pairs.
        if rising and base.row_keys is not None and base.row_pairs is not None and len(net_keys):
            # Both row lists in paper order: a search of sorted keys in sorted keys, several
            # times faster than unsorted ones; each pair found is confirmed by its own key.
            found, at = positions_in(by_paper, base.row_keys)
            pos = base.row_pairs[at] if len(base.row_pairs) else at
            found &= net_keys[pos] == keys
        else:
            certified_used = np.sort(base.used)
            found, at = positions_in(keys, net_keys[certified_used])
            pos = certified_used[at] if len(certified_used) else at
        miss = np.flatnonzero(~found)
        if len(miss):
            found[miss], pos[miss] = _positions(keys[miss], net_keys)
    else:
        found, pos = _positions(keys, net_keys)
    if not found.all():
        return ["the plan uses a pair that is not eligible in the session's network"], None
    used = pos if order is None else order[pos]
    # Rows in strictly rising paper-major order are distinct pairs, each found at its own
    # position (a pair's position holds its key): only rows in another order are sorted (a
    # few milliseconds on a large plan) to look for a pair used twice.
    if not rising:
        ranked = np.sort(used)
        if len(ranked) > 1 and bool(np.any(ranked[1:] == ranked[:-1])):
            return ["the plan uses a pair twice"], None
    side = _side_flows(net, used)
    pot = np.asarray(potentials)
    try:
        if base is not None and net.pair_arcs.stop - net.pair_arcs.start >= FUSED_PAIRS:
            # A re-plan: the same conditions on every arc, the pair block in one fused pass.
            _check_fused(net, used, side, pot)
        else:
            pair_flow = np.zeros(len(net_keys), dtype=np.int64)
            pair_flow[used] = 1
            check_cost_certificate(
                net.n_nodes,
                net.tails,
                net.heads,
                net.capacities,
                net.costs,
                _whole_flow(net, pair_flow, side),
                potentials,
                lower=net.lower,
            )
    except FlowCheckError as error:
        return [f"optimality certificate rejected: {error}"], None
    rows = (by_paper, pos if order is None else order[pos]) if rising else (None, None)
    kept = Certified(net, used, net_keys, order, *rows)
    return [], kept


def _side_arcs(net: PlanNetwork) -> np.ndarray:
    """Every arc outside the pair block, in arc order."""
    block = net.pair_arcs
    return np.r_[0 : block.start, block.stop : len(net.tails)].astype(np.int64)


def _whole_flow(net: PlanNetwork, pair_flow: np.ndarray, side: np.ndarray) -> np.ndarray:
    flow = np.empty(len(net.tails), dtype=np.int64)
    flow[net.pair_arcs] = pair_flow
    flow[: net.pair_arcs.start] = side[: net.pair_arcs.start]
    flow[net.pair_arcs.stop :] = side[net.pair_arcs.start :]
    return flow


def _check_fused(net: PlanNetwork, used: np.ndarray, side: np.ndarray, pot: np.ndarray) -> None:
    """The certificate of `check_cost_certificate` on the whole network, its pair block in one
    fused pass (`plan.check_pass`): node ids, bounds, conservation and both reduced-cost
    conditions on every arc, faults reported as that check reports them (the first arc of the
    first kind in its order). `used`: the distinct pair positions carrying one unit each; `side`:
    the flow on every other arc, in arc order."""
    from review_alloc.plan.check_pass import (
        ABOVE_CAPACITY,
        BAD_HEAD,
        BAD_TAIL,
        BELOW_LOWER,
        CAN_FALL,
        CAN_RISE,
        pair_block_faults,
    )

    n = net.n_nodes
    if pot.ndim != 1 or len(pot) != n or (pot.size and pot.dtype.kind not in "iu"):
        raise FlowCheckError(f"potentials must be a 1-D integer array of {n} entries")
    pot = pot.astype(np.int64, copy=False)
    block = net.pair_arcs
    mask = np.zeros(block.stop - block.start, dtype=np.bool_)
    mask[used] = True
    # int64 and read-only throughout (views; a copy only where the type differs): numba types
    # a read-only array apart from a writable one, and the kernel must compile one signature.
    arrays = (net.tails, net.heads, net.capacities, net.lower, net.costs, pot)
    first = pair_block_faults(
        *(_read_only(a.astype(np.int64, copy=False)) for a in arrays),
        np.int64(block.start),
        _read_only(mask),
    )
    sides = _side_arcs(net)
    t, h = net.tails[sides].astype(np.int64), net.heads[sides].astype(np.int64)
    upper, low = net.capacities[sides], net.lower[sides]

    def first_arc(kind: int, side_faults: np.ndarray) -> int | None:
        """The first arc, in arc order, of the pair block's or the other arcs' faults."""
        found = [block.start + int(first[kind])] if first[kind] >= 0 else []
        if side_faults.any():
            found.append(int(sides[int(np.argmax(side_faults))]))
        return min(found) if found else None

    def flow_on(arc: int) -> int:
        if block.start <= arc < block.stop:
            return int(mask[arc - block.start])
        return int(side[int(np.searchsorted(sides, arc))])

    ends = (("tails", BAD_TAIL, t, net.tails), ("heads", BAD_HEAD, h, net.heads))
    for name, kind, ids, nodes in ends:
        arc = first_arc(kind, (ids < 0) | (ids >= n))
        if arc is not None:
            raise FlowCheckError(
                f"{name}[{arc}] is {nodes[arc]}; node ids must be between 0 and {n - 1}"
            )
    for what, kind, faults, bounds in (
        ("lower", BELOW_LOWER, side < low, net.lower),
        ("capacities", ABOVE_CAPACITY, side > upper, net.capacities),
    ):
        arc = first_arc(kind, faults)
        if arc is not None:
            raise FlowCheckError(
                f"flow[{arc}] is {flow_on(arc)} but {what}[{arc}] is {bounds[arc]}"
            )
    # Conservation: the flow is the pairs' units and the other arcs' flows, nothing else.
    balance = (
        np.bincount(t, weights=side, minlength=n)
        - np.bincount(h, weights=side, minlength=n)
        + np.bincount(net.tails[block][used], minlength=n)
        - np.bincount(net.heads[block][used], minlength=n)
    )
    if balance.any():
        v = int(np.flatnonzero(balance)[0])
        raise FlowCheckError(f"node {v}: out - in is {int(balance[v])} but its supply is 0")
    reduced = net.costs[sides] + pot[t] - pot[h]
    arc = first_arc(CAN_RISE, (side < upper) & (reduced < 0))
    if arc is not None:
        raise FlowCheckError(
            f"edge {arc} ({net.tails[arc]} -> {net.heads[arc]}) has flow {flow_on(arc)} below "
            f"capacity {net.capacities[arc]} but reduced cost {_reduced(net, pot, arc)} < 0: "
            "more flow there would cost less"
        )
    arc = first_arc(CAN_FALL, (side > low) & (reduced > 0))
    if arc is not None:
        raise FlowCheckError(
            f"edge {arc} ({net.tails[arc]} -> {net.heads[arc]}) has flow {flow_on(arc)} above "
            f"lower bound {net.lower[arc]} but reduced cost {_reduced(net, pot, arc)} > 0: "
            "less flow there would cost less"
        )


def _read_only(array: np.ndarray) -> np.ndarray:
    """A read-only view of `array`."""
    view = array.view()
    view.flags.writeable = False
    return view


def _reduced(net: PlanNetwork, pot: np.ndarray, arc: int) -> int:
    """The reduced cost of one arc."""
    return int(net.costs[arc]) + int(pot[net.tails[arc]]) - int(pot[net.heads[arc]])


def _fill_units(
    owner: np.ndarray, caps: np.ndarray, remaining: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Fill a block of source arcs in order, per reviewer, up to what each still has to carry."""
    if len(owner) == 0:
        return np.zeros(0, np.int64), remaining
    cum = np.cumsum(caps)
    # Per owner, the capacity of the owners before it. A bincount, not `np.add.at` (a
    # millisecond per 15,000 arcs); its float64 sums are exact, capacities being counts.
    owner_start = np.bincount(owner + 1, weights=caps, minlength=len(remaining) + 1).astype(
        np.int64
    )
    before = cum - caps - np.cumsum(owner_start)[owner]
    flow = np.clip(remaining[owner] - before, 0, caps)
    left = remaining - np.bincount(owner, weights=flow, minlength=len(remaining)).astype(np.int64)
    return flow.astype(np.int64), left


def arc_flows(net: PlanNetwork, pair_flow: np.ndarray) -> np.ndarray:
    """Every arc's flow implied by the pair arcs' flows alone (each tiered block filled in its
    cost order), so the certificate is checked on a flow the engine did not produce."""
    pair_flow = np.asarray(pair_flow, dtype=np.int64)
    return _whole_flow(net, pair_flow, _side_flows(net, np.flatnonzero(pair_flow > 0)))


def _side_flows(net: PlanNetwork, used: np.ndarray) -> np.ndarray:
    """The flow on every arc outside the pair block (in arc order) implied by the pairs `used`
    (pair positions, each carrying one unit)."""
    block = net.pair_arcs
    flow = np.zeros(len(net.tails) - (block.stop - block.start), dtype=np.int64)

    def at(arcs: slice | int) -> slice | int:
        # Arc positions past the pair block move back by its length.
        if isinstance(arcs, int):
            return arcs if arcs < block.start else arcs - (block.stop - block.start)
        shift = 0 if arcs.start < block.start else block.stop - block.start
        return slice(arcs.start - shift, arcs.stop - shift)

    loads = np.bincount(net.pair_reviewer[used], minlength=net.n_reviewers).astype(np.int64)
    counts = np.bincount(net.pair_paper[used], minlength=net.n_papers).astype(np.int64)
    floor_flow, left = _fill_units(net.floor_arc_reviewer, net.capacities[net.floor_arcs], loads)
    flow[at(net.floor_arcs)] = floor_flow
    flow[at(net.rest_arcs)], over = _fill_units(
        net.rest_arc_reviewer, net.capacities[net.rest_arcs], left
    )
    flow[at(net.overload_arcs)] = over[net.overload_reviewers]
    required = np.minimum(counts, net.capacities[net.required_arcs])
    flow[at(net.required_arcs)] = required
    flow[at(net.extra_arcs)] = counts - required
    flow[at(net.return_arc)] = int(counts.sum())
    # (Gathers at 60,000 scattered pairs cost a millisecond each: none without such arcs.)
    senior = net.pair_senior[used] if len(net.senior_paper) else np.zeros(0, np.int64)
    seniors = np.bincount(senior[senior >= 0], minlength=len(net.senior_paper)).astype(np.int64)
    senior_required = np.minimum(seniors, net.senior_need)
    flow[at(net.senior_required_arcs)] = senior_required
    flow[at(net.senior_rest_arcs)] = seniors - senior_required
    group = net.pair_group[used] if len(net.group_paper) else np.zeros(0, np.int64)
    flow[at(net.group_arcs)] = np.bincount(
        group[group >= 0], minlength=len(net.group_paper)
    ).astype(np.int64)
    return flow


def _rid(session: Session, key: int, n_p: int) -> str:
    return session.reviewers[int(key) // n_p].id


def _pid(session: Session, key: int, n_p: int) -> str:
    return session.papers[int(key) % n_p].id
