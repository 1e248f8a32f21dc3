"""A changed session's network derived from the network an earlier plan was solved on.

A re-plan after a small change (a reviewer or paper withdrawn, a cap, floor, reviews or
overload changed, conflicts, pins or blocks added or removed, another earlier plan to keep)
keeps the earlier network's arc topology: pair arcs that became forbidden get capacity 0
instead of leaving, changed keep bonuses change pair costs, and changed demands change the
capacities of the source, paper and senior arcs. Only the arcs of what changed are looked at,
plus a few vectorised passes, and the earlier flow and potentials stay valid as a start
without any matching of two networks. The per-entity arrays (demands, overload allowances,
seniors wanted) of the session planned on are kept with its outcome (`PlanOutcome.arrays`),
so that the next patch from it reads again only the entities that changed (`changed_arrays`);
the pair keys of all arcs are worked out only where a changed conflict, pin or block or
another earlier plan needs them.

Where the change is anything else (new or removed entities, a policy change, another score
table, an entity's attributes beyond the fields above, a reinstatement, a pair that becomes
eligible without an arc, weights that no longer agree) `patched_network` returns None and the
planner builds the network anew. Which pairs are forbidden is asked of `plan.rules.PairRules`,
never derived here.

A patched network has the optimum of a freshly built one. Zero-capacity arcs carry no flow
and put no condition on the potentials. A senior node whose paper needs no senior now (need 0)
and a crowded institution group's node that lost candidates constrain nothing a fresh build
would not: the group's cap binds at most what the group still holds, and a mixed group's parts
stay capped at m each as a fresh build's relaxation caps them. The tier weights are checked to
be the earlier network's, computed by `plan.weights.fitting_weights` for the kept structure and
the top score among the pairs still open, so they separate the tiers of this network (a
structure with more nodes only widens the bounds). Where no node fell idle, the patched network
is exactly a fresh one plus zero-capacity arcs, with the same cost and dual certificate.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import compress, count
from operator import is_not

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.figures import active_demands, assignment_arrays
from review_alloc.plan.network import PlanNetwork
from review_alloc.plan.overload import overload_allowances
from review_alloc.plan.pairkeys import pair_keys, positions_in
from review_alloc.plan.rules import PairRules
from review_alloc.plan.seniors import paper_senior_need
from review_alloc.plan.weights import fitting_weights

PATCHABLE_REVIEWER_FIELDS = frozenset({"cap", "floor", "withdrawn", "overload"})
"""Reviewer fields a network patch can follow (they change capacities or forbid pairs)."""

PATCHABLE_PAPER_FIELDS = frozenset({"reviews", "min_reviews", "withdrawn", "senior_min"})
"""Paper fields a network patch can follow."""


@dataclass(frozen=True)
class SessionChange:
    """What differs between two sessions that a network patch can follow."""

    reviewers: np.ndarray
    """Positions of reviewers whose patchable fields changed."""
    papers: np.ndarray
    """Positions of papers whose patchable fields changed."""
    pairs: tuple[tuple[str, str], ...]
    """(reviewer id, paper id) of conflict, pin and block rows added or removed."""
    conflicts_same: bool
    """Whether the declared conflicts are the same pairs with the same reasons (the inferred
    ones then are too, since no attribute they are inferred from changed)."""


def _entity_changes(old: list, new: list, patchable: frozenset[str]) -> np.ndarray | None:
    """Positions whose fields differ only in `patchable` ones; None if ids or others differ."""
    if len(old) != len(new):
        return None
    changed: list[int] = []
    # The workspace copies only the entities a change touches: the identity scan runs in C
    # (map, compress) and Python looks only at the few that are not the same object.
    for k in compress(count(), map(is_not, old, new)):
        a, b = old[k], new[k]
        da, db = a.__dict__, b.__dict__
        if da == db:
            continue
        if any(da[name] != db[name] for name in da if name not in patchable):
            return None
        changed.append(k)
    return np.asarray(changed, dtype=np.int64)


def _row_pairs(old: list, new: list) -> set[tuple[str, str]]:
    """(reviewer, paper) ids of rows in one list and not the other."""
    if old is new:
        return set()
    return {(r.reviewer, r.paper) for r in old} ^ {(r.reviewer, r.paper) for r in new}


def _same_scores(old: Session, new: Session) -> bool:
    a, b = old.scores, new.scores
    if a is b:
        return True
    return (
        np.array_equal(a.reviewer, b.reviewer)
        and np.array_equal(a.paper, b.paper)
        and np.array_equal(a.value, b.value)
    )


def session_change(old: Session, new: Session) -> SessionChange | None:
    """What changed from `old` to `new`, when a network patch can follow it (else None)."""
    if not (old.policy is new.policy or old.policy == new.policy):
        return None
    if not _same_scores(old, new):
        return None
    reviewers = _entity_changes(old.reviewers, new.reviewers, PATCHABLE_REVIEWER_FIELDS)
    papers = _entity_changes(old.papers, new.papers, PATCHABLE_PAPER_FIELDS)
    if reviewers is None or papers is None:
        return None
    conflicts_same = old.conflicts is new.conflicts or old.conflicts == new.conflicts
    pairs = _row_pairs(old.pins, new.pins) | _row_pairs(old.blocks, new.blocks)
    if not conflicts_same:
        pairs |= _row_pairs(old.conflicts, new.conflicts)
    return SessionChange(reviewers, papers, tuple(sorted(pairs)), conflicts_same)


@dataclass(frozen=True, eq=False)
class SessionArrays:
    """The per-entity arrays a patch reads from a session: `active_demands`, the overload
    allowances and the seniors wanted per paper."""

    reviews: np.ndarray
    minimum: np.ndarray
    cap: np.ndarray
    floor: np.ndarray
    allowance: np.ndarray
    need: np.ndarray

    def __post_init__(self) -> None:
        # Kept with the outcome and shared with the next patch: nobody may write into them.
        for array in (
            self.reviews, self.minimum, self.cap, self.floor, self.allowance, self.need
        ):
            array.flags.writeable = False


def session_arrays(session: Session) -> SessionArrays:
    """The arrays of `session`, each by its own vectorised pass over the entities."""
    reviews, minimum, cap, floor = active_demands(session)
    return SessionArrays(
        reviews, minimum, cap, floor, overload_allowances(session), paper_senior_need(session)
    )


def changed_arrays(old: SessionArrays, new: Session, change: SessionChange) -> SessionArrays:
    """`session_arrays(new)` from `old` (those of the session `change` was taken from): only
    the entities the change names are read again; the policy is the same, so no other
    entity's values moved."""
    policy = new.policy
    reviews, minimum = old.reviews.copy(), old.minimum.copy()
    cap, floor = old.cap.copy(), old.floor.copy()
    allowance, need = old.allowance.copy(), old.need.copy()
    for j in change.reviewers.tolist():
        r = new.reviewers[j]
        if r.withdrawn:
            cap[j] = floor[j] = allowance[j] = 0
        else:
            cap[j], floor[j] = new.reviewer_cap(j), new.reviewer_floor(j)
            allowance[j] = policy.overload_allowance if r.overload is None else r.overload
    for i in change.papers.tolist():
        p = new.papers[i]
        if p.withdrawn:
            reviews[i] = minimum[i] = need[i] = 0
        else:
            reviews[i], minimum[i] = new.paper_reviews(i), new.paper_min_reviews(i)
            own = policy.senior_min if p.senior_min is None else p.senior_min
            need[i] = min(own, reviews[i])
    return SessionArrays(reviews, minimum, cap, floor, allowance, need)


def arrays_for(
    old_session: Session, new: Session, change: SessionChange, old: SessionArrays | None
) -> SessionArrays:
    """`session_arrays(new)`: updated from `old` (the arrays of `old_session`, kept with the
    outcome planned on it) when at hand, else by a full pass."""
    if old is None:
        return session_arrays(new)
    return changed_arrays(old, new, change)


@dataclass(frozen=True)
class NetworkPatch:
    """A network derived from an earlier one, and the arcs whose bounds or costs changed."""

    network: PlanNetwork
    arcs: np.ndarray
    """Arcs whose capacity, lower bound or cost differs from the earlier network's."""
    capacities: np.ndarray
    lower: np.ndarray
    costs: np.ndarray
    """The new values of `arcs` (also in `network`'s arrays)."""
    change: SessionChange
    arrays: SessionArrays
    """The new session's per-entity arrays, kept with the outcome for the next patch."""

    @property
    def demands(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The new session's `active_demands` (reviews, min_reviews, cap, floor)."""
        a = self.arrays
        return a.reviews, a.minimum, a.cap, a.floor


def network_pair_keys(net: PlanNetwork) -> np.ndarray:
    """The pair arcs' keys `reviewer * n_papers + paper`, increasing as the builder emits them."""
    return pair_keys(net.pair_reviewer, net.pair_paper, max(net.n_papers, 1))


def kept_pairs(
    session: Session, earlier: Plan, keys: np.ndarray, n_papers: int
) -> np.ndarray:
    """Per pair arc (sorted `keys`): did `earlier` assign it? (as `plan.keep` does, by search)."""
    mask = np.zeros(len(keys), dtype=bool)
    if not earlier.assignments or not len(keys):
        return mask
    j, i, _ = assignment_arrays(session, earlier.assignments)
    known = (j >= 0) & (i >= 0)
    found, at = positions_in(pair_keys(j[known], i[known], n_papers), keys)
    mask[at[found]] = True
    return mask


def _reviewer_arcs(net: PlanNetwork, reviewers: np.ndarray) -> np.ndarray:
    """Pair arcs (block positions) of the given reviewers; pairs are in reviewer order."""
    if not len(reviewers):
        return np.zeros(0, dtype=np.int64)
    start = np.searchsorted(net.pair_reviewer, reviewers, side="left")
    stop = np.searchsorted(net.pair_reviewer, reviewers, side="right")
    sizes = stop - start
    offsets = np.arange(int(sizes.sum())) - np.repeat(np.cumsum(sizes) - sizes, sizes)
    return np.repeat(start, sizes) + offsets


def patched_network(
    old: PlanNetwork,
    old_session: Session,
    new: Session,
    earlier: Plan | None,
    *,
    old_plan: Plan | None = None,
    old_flow: np.ndarray | None = None,
    old_arrays: SessionArrays | None = None,
    old_used: np.ndarray | None = None,
) -> NetworkPatch | None:
    """The network of `new` (keeping `earlier`'s pairs when given) derived from `old`, the
    network of `old_session`; None when the change is not one a patch follows.

    `old_plan` and `old_flow` (the plan decoded from `old` and its flow) let the keep tier be
    read off the flow when `earlier` is that plan; `old_arrays` (`session_arrays(old_session)`,
    kept with the earlier outcome) let the per-entity arrays be read again only where changed;
    `old_used` (the sorted pair positions carrying `old_flow`) spares reading the whole flow.
    """
    policy = new.policy
    if policy.bottleneck or old.kept is None and earlier is not None:
        return None
    change = session_change(old_session, new)
    if change is None:
        return None
    n_p = old.n_papers
    was_r = np.fromiter(
        (old_session.reviewers[j].withdrawn for j in change.reviewers.tolist()), bool
    )
    now_r = np.fromiter((new.reviewers[j].withdrawn for j in change.reviewers.tolist()), bool)
    was_p = np.fromiter((old_session.papers[i].withdrawn for i in change.papers.tolist()), bool)
    now_p = np.fromiter((new.papers[i].withdrawn for i in change.papers.tolist()), bool)
    if (was_r & ~now_r).any() or (was_p & ~now_p).any():
        # A reinstated reviewer or paper may need arcs the earlier network never had.
        return None
    gone_r = change.reviewers[now_r & ~was_r]
    gone_p = change.papers[now_p & ~was_p]

    conflicts: ConflictSet = old.conflicts if change.conflicts_same else conflict_pairs(new)
    same_base = old.rules is not None and old.rules.session is old_session
    rules = PairRules.following(
        new, old.rules, conflicts, (change.reviewers, change.papers) if same_base else None
    )
    rules.check_pins()
    look = [_reviewer_arcs(old, gone_r)]
    if len(gone_p):
        look.append(np.flatnonzero(np.isin(old.pair_paper, gone_p, kind="table")))
    keys = network_pair_keys(old) if change.pairs else None
    if change.pairs:
        assert keys is not None
        r_at, p_at = new.reviewer_index(), new.paper_index()
        named = [(r_at[r], p_at[p]) for r, p in change.pairs if r in r_at and p in p_at]
        if named:
            j, i = np.asarray(named, dtype=np.int64).T
            found, at = positions_in(pair_keys(j, i, n_p), keys)
            missing = ~found
            if missing.any() and not rules.forbidden(j[missing], i[missing]).all():
                # A pair now allowed that has no arc (a lifted conflict or block, a new pin).
                return None
            look.append(at[found])
    arcs = _sorted_unique(np.concatenate(look)) if look else np.zeros(0, np.int64)

    capacities = old.capacities.copy()
    # The lower bounds, costs and pin flags are copied only where a value changes (a pin set
    # or lifted among the arcs looked at, the hard senior rule, a keep tier), and compared
    # only when copied.
    lower, costs, pair_pinned = old.lower, old.costs, old.pair_pinned
    if old.senior_hard:
        lower = lower.copy()
    if len(arcs):
        r, p = old.pair_reviewer[arcs], old.pair_paper[arcs]
        allowed = ~rules.forbidden(r, p)
        pin_rows = [(x.reviewer, x.paper) for x in new.pins]
        pinned_keys = np.sort(
            np.asarray(
                [
                    new.reviewer_index()[a] * n_p + new.paper_index()[b]
                    for a, b in pin_rows
                    if a in new.reviewer_index() and b in new.paper_index()
                ],
                dtype=np.int64,
            )
        )
        arc_keys = pair_keys(r, p, n_p)
        pinned = positions_in(arc_keys, pinned_keys)[0] & allowed
        # Pair arc k is network arc pair_arcs.start + k (the pair block is one slice).
        capacities[old.pair_arcs.start + arcs] = allowed.astype(np.int64)
        if (pinned != old.pair_pinned[arcs]).any():
            pair_pinned = pair_pinned.copy()
            pair_pinned[arcs] = pinned
        if (lower[old.pair_arcs.start + arcs] != pinned).any():
            lower = lower.copy() if lower is old.lower else lower
            lower[old.pair_arcs.start + arcs] = pinned.astype(np.int64)

    arrays = arrays_for(old_session, new, change, old_arrays)
    reviews, minimum, cap, floor = arrays.reviews, arrays.minimum, arrays.cap, arrays.floor
    allowance = arrays.allowance
    over = np.flatnonzero(allowance > 0)
    if not np.isin(over, old.overload_reviewers).all() or (len(over) > 0) != (
        len(old.overload_reviewers) > 0
    ):
        return None
    if not _source_capacities(old, capacities, cap, floor):
        return None
    capacities[old.required_arcs] = minimum
    capacities[old.extra_arcs] = reviews - minimum
    total = int(reviews.sum())
    capacities[old.return_arc] = total
    capacities[old.overload_arcs] = allowance[old.overload_reviewers]

    need_all = arrays.need
    if not np.isin(np.flatnonzero(need_all > 0), old.senior_paper).all():
        return None
    need = need_all[old.senior_paper]
    capacities[old.senior_required_arcs] = need
    capacities[old.senior_rest_arcs] = reviews[old.senior_paper]
    if old.senior_hard:
        lower[old.senior_required_arcs] = need

    kept = None
    if earlier is not None:
        if old_plan is not None and old_flow is not None and _same_rows(earlier, old_plan):
            if old_used is not None:
                kept = np.zeros(len(old.pair_score), dtype=bool)
                kept[old_used] = True
            else:
                kept = old_flow[old.pair_arcs] > 0
            # Pairs carrying flow had capacity, and pair capacities changed only at `arcs`.
            kept[arcs] &= capacities[old.pair_arcs.start + arcs] > 0
        else:
            kept = kept_pairs(
                new, earlier, network_pair_keys(old) if keys is None else keys, n_p
            )
            kept &= capacities[old.pair_arcs] > 0
        assert old.kept is not None
        # Only the pairs whose keep flag flipped change cost (a few, not all 3 M).
        flipped = np.flatnonzero(kept ^ old.kept)
        gained = kept[flipped].astype(np.int64) - old.kept[flipped].astype(np.int64)
        costs = costs.copy()
        costs[old.pair_arcs.start + flipped] -= old.keep_weight * gained
    else:
        flipped = np.zeros(0, dtype=np.int64)
    if not _same_weights(old, new, capacities, cap, total, keep=kept is not None):
        return None

    changed = _changed_arcs(old, capacities, lower, costs, arcs, flipped)
    net = replace(
        old,
        capacities=capacities,
        lower=lower,
        costs=costs,
        conflicts=conflicts,
        rules=rules,
        pair_pinned=pair_pinned,
        senior_need=need,
        kept=kept,
    )
    return NetworkPatch(
        network=net,
        arcs=changed,
        capacities=capacities[changed],
        lower=lower[changed],
        costs=costs[changed],
        change=change,
        arrays=arrays,
    )


def _sorted_unique(values: np.ndarray) -> np.ndarray:
    """`np.unique` of a few thousand positions that mostly come sorted already (a reviewer's
    arcs are one run): numpy's hashing pass cost more than the sort of nearly sorted values."""
    # Stable sort: timsort merges the sorted runs the arcs come in, in linear time.
    values = np.sort(values, kind="stable")
    if len(values) < 2:
        return values
    return values[np.concatenate(([True], values[1:] != values[:-1]))]


def _changed_arcs(
    old: PlanNetwork,
    capacities: np.ndarray,
    lower: np.ndarray,
    costs: np.ndarray,
    arcs: np.ndarray,
    flipped: np.ndarray,
) -> np.ndarray:
    """The arcs whose capacity, lower bound or cost differ from `old`'s, sorted.

    Within the pair block a patch writes only the pairs it looked at (`arcs`) and those whose
    keep flag flipped (`flipped`, both pair positions), so only those are compared there (a
    few thousand, not 3 M); every arc outside the block is compared. The checker compares
    every arc of the networks on its own, so a pair missed here would fail the certificate.
    """
    block = old.pair_arcs
    pairs = _sorted_unique(np.concatenate([arcs, flipped]).astype(np.int64)) + block.start
    parts = []
    # The arcs before and after the pair block are compared as slices (no gathers).
    for where in (slice(0, block.start), pairs, slice(block.stop, len(capacities))):
        moved = capacities[where] != old.capacities[where]
        if lower is not old.lower:
            moved |= lower[where] != old.lower[where]
        if costs is not old.costs:
            moved |= costs[where] != old.costs[where]
        at = np.flatnonzero(moved)
        parts.append(pairs[at] if where is pairs else at + where.start)
    return np.concatenate(parts)


def _same_rows(a: Plan, b: Plan) -> bool:
    """Whether two plans hold the same (reviewer, paper) rows (the same list is enough)."""
    if a is b or a.assignments is b.assignments:
        return True
    if len(a.assignments) != len(b.assignments):
        return False
    return all(
        x is y or (x.reviewer == y.reviewer and x.paper == y.paper)
        for x, y in zip(a.assignments, b.assignments, strict=True)
    )


def _source_capacities(
    old: PlanNetwork, capacities: np.ndarray, cap: np.ndarray, floor: np.ndarray
) -> bool:
    """Set the source arcs' capacities for the new caps and floors; False when the arcs cannot
    express them (balance unit arcs whose count or floor share would change)."""
    if old.balance_step == 0:
        capacities[old.floor_arcs] = floor
        capacities[old.rest_arcs] = cap - floor
        return True
    # One unit arc per load unit: the floor units first, then the rest, in rising cost.
    f_units = np.bincount(old.floor_arc_reviewer, minlength=old.n_reviewers)
    r_units = np.bincount(old.rest_arc_reviewer, minlength=old.n_reviewers)
    off = cap == 0
    if not (
        np.array_equal(floor[~off], f_units[~off])
        and np.array_equal((cap - floor)[~off], r_units[~off])
    ):
        return False
    capacities[old.floor_arcs] = (~off[old.floor_arc_reviewer]).astype(np.int64)
    capacities[old.rest_arcs] = (~off[old.rest_arc_reviewer]).astype(np.int64)
    return True


def _same_weights(
    old: PlanNetwork,
    new: Session,
    capacities: np.ndarray,
    cap: np.ndarray,
    total: int,
    *,
    keep: bool,
) -> bool:
    """Whether a fresh build would weigh the tiers as `old` does: the same top score among the
    pairs still open, and the same weights under the new demands."""
    n_sen, n_grp = len(old.senior_paper), len(old.group_paper)
    pair_caps = capacities[old.pair_arcs]
    best = old.top_pair
    if best < 0 and len(pair_caps):
        best = int(np.argmax(old.pair_score))
    if best >= 0 and pair_caps[best] > 0:
        # The best-scored pair is still open: it is the top (no masked pass over all pairs).
        top = float(old.pair_score[best])
    else:
        open_pairs = pair_caps > 0
        top = float(old.pair_score[open_pairs].max()) if open_pairs.any() else 0.0
    resolution, tiers = fitting_weights(
        top,
        new.policy.balance,
        2 * max(min(old.n_reviewers, old.n_papers + n_sen + n_grp), 1),
        n_sen,
        int(cap.max()) if len(cap) else 0,
        total,
        old.n_nodes,
        overload=len(old.overload_reviewers) > 0,
        keep=keep,
    )
    overload_cost = old.costs[old.overload_arcs]
    return (
        resolution == old.resolution
        and (tiers.required, tiers.coverage, tiers.floors) == old.weights
        and tiers.seniors == old.senior_weight
        and tiers.keep == old.keep_weight
        and bool(np.all(overload_cost == tiers.overload))
        and int(np.rint(top * resolution)) == old.max_score
    )
