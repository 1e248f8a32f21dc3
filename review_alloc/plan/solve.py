"""Make an optimal plan: build the network, solve it, decode it, and have it checked.

The objective, lexicographic, highest first: required coverage; seniors (sum over papers of
min(seniors, senior_min), unless the policy makes seniors hard); coverage; with `bottleneck`,
the lowest score of an assigned unpinned pair; reviewer floors; total score minus the balance
penalty `balance * sum over reviewers of load * (load - 1) / 2`.

The institution rule and the senior rule together are not a network flow where a (paper,
institution) group mixes seniors and juniors (the two families of reviewer sets cross). There
each part of the group is first capped at m, a relaxation: if its optimum keeps the real rule,
it is optimal. Otherwise a greedy dive fixes how violated groups share their cap, and a
lexicographic MIP (`plan.exact`, HiGHS) settles the tiers where relaxation and dive differ and
chooses every group's shares; the flow engine plans that split (see `_solve_rules`). The plan is
then proven optimal (MIP status optimal, gap 0); only when the MIP's time limit runs out is the
best plan found reported with its bound and gap (`Plan.bound`).

Seniors are a tier just below required coverage by default, not a hard rule: a venue with too
few seniors still gets its best plan, and the papers short of seniors are listed with a reason.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime

import numpy as np

from review_alloc.flow import (
    CostFlowResult,
    FlowInputError,
    InfeasibleError,
    KeptFlow,
    WarmStart,
    min_cost_flow,
)
from review_alloc.model import Plan, Session
from review_alloc.plan.assemble import PlanRows, assemble_rows
from review_alloc.plan.checker import CheckState, check_plan
from review_alloc.plan.conflicts import ConflictSet, conflict_pairs
from review_alloc.plan.errors import PlanInputError
from review_alloc.plan.exact import EXACT_TIERS, ExactResult, exact_tiers, solve_exact
from review_alloc.plan.fairness import coverage_flows, highest_threshold, score_thresholds
from review_alloc.plan.leads import LeadChoice
from review_alloc.plan.network import PlanNetwork, build_network
from review_alloc.plan.pairkeys import contains
from review_alloc.plan.patch import NetworkPatch, SessionArrays, patched_network, session_arrays
from review_alloc.plan.warmstart import same_cost_scale, warm_start_for
from review_alloc.plan.weights import SCORE_RESOLUTION

METHOD = "lexicographic min-cost flow (cost scaling; re-plans warm-started by primal-dual)"

OBJECTIVE_TIERS = ("required", "seniors", "coverage", "floors", "score")
"""Names of the values `tier_values` returns, highest tier first."""


class _KeptSlot:
    """Where an outcome keeps what the next patched re-plan starts from, built on first use:
    its optimum as a patchable residual state and its session's per-entity arrays."""

    def __init__(
        self, state: KeptFlow | None = None, arrays: SessionArrays | None = None
    ) -> None:
        self.state = state
        self.refused = False
        self.arrays = arrays
        self.lock = threading.Lock()


@dataclass(frozen=True)
class PlanOutcome:
    """A checked plan with the network it came from and its dual certificate."""

    plan: Plan
    network: PlanNetwork
    potentials: np.ndarray
    leads: LeadChoice | None = None
    flow: np.ndarray | None = None
    """The optimal flow on `network`'s arcs, kept so that the next plan can start from it."""
    bottleneck: float | None = None
    """The bottleneck threshold (lowest allowed unpinned score) when the option is on."""
    relaxed_bound: dict[str, float] = field(default_factory=dict)
    """Tier bounds (and the measured "gap") when the exact program's time limit ran out before
    proving the plan optimal, else {}."""
    loads_before_balance: np.ndarray | None = None
    """Per-reviewer loads of the same session planned with balance off (only when balancing)."""
    tiers: dict[str, float] = field(default_factory=dict)
    """The plan's tier values (see `tier_values`)."""
    proof: ExactResult | None = None
    """The exact program's proof where the institution and senior rules cross (None where the
    flow network alone is exact and its dual certificate is the proof)."""
    planned: Session | None = None
    """The session this outcome was planned on: the next plan compares its session with it to
    patch `network` instead of building anew (`plan.patch`)."""
    rows: PlanRows | None = None
    """The plan's rows with their positions, so that a patched re-plan reuses unchanged
    assignments."""
    patched: bool = False
    """Whether `network` was derived from the previous outcome's by a patch."""
    checked_conflicts: ConflictSet | None = None
    """The conflict set the checker derived for `planned`, reused by the next check when the
    changes since leave every conflict input alone."""
    check_state: CheckState | None = None
    """What the check of this outcome established, so that the next check of a re-plan on a
    patched `network` certifies only what changed."""
    pairs_used: np.ndarray | None = field(default=None, repr=False, compare=False)
    """Sorted positions in `network`'s pair block of the pairs carrying `flow` (the plan's
    pairs), so that the next patch and decoding need not read the whole flow again."""
    kept: _KeptSlot = field(default_factory=_KeptSlot, repr=False, compare=False)
    """The optimum as a `flow.KeptFlow` (see `kept_flow`): a patched re-plan re-solves from it."""

    def kept_flow(self) -> KeptFlow | None:
        """The optimum on `network` as a patchable residual state (None without a flow).

        Built once, on first use: the workspace builds it in a background thread after a plan,
        so that the next re-plan finds it ready; a re-plan solved from it keeps its own. The
        session's per-entity arrays (`entity_arrays`) are readied with it.
        """
        if self.flow is None:
            return None
        self.entity_arrays()
        with self.kept.lock:
            if self.kept.state is None and not self.kept.refused:
                net = self.network
                try:
                    self.kept.state = KeptFlow.from_solution(
                        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, net.lower,
                        self.flow, self.potentials,
                    )
                except FlowInputError:
                    # Potentials that do not certify this flow (an outcome put together from
                    # other solves): the next re-plan solves cold instead.
                    self.kept.refused = True
            return self.kept.state

    def entity_arrays(self) -> SessionArrays | None:
        """`plan.patch.session_arrays` of `planned` (None without it), built on first use; a
        patched re-plan keeps those its patch derived."""
        if self.planned is None:
            return None
        with self.kept.lock:
            if self.kept.arrays is None:
                self.kept.arrays = session_arrays(self.planned)
            return self.kept.arrays

    @property
    def proven_optimal(self) -> bool:
        """True unless the exact program stopped at its time limit with a bound above the plan."""
        return not self.relaxed_bound


def tier_values(net: PlanNetwork, used: np.ndarray) -> dict[str, float]:
    """The objective's tier values of the pairs `used` (boolean per pair arc, or the sorted
    positions in the pair block of the pairs used) in `net`."""
    # One pass over the pair mask (none when given the positions); the rest works on the few
    # chosen pairs.
    used = np.asarray(used)
    chosen = np.flatnonzero(used) if used.dtype == bool else used
    loads = np.bincount(net.pair_reviewer[chosen], minlength=net.n_reviewers)
    counts = np.bincount(net.pair_paper[chosen], minlength=net.n_papers)
    minimum = net.capacities[net.required_arcs]
    reviews = minimum + net.capacities[net.extra_arcs]
    floor = np.bincount(
        net.floor_arc_reviewer, weights=net.capacities[net.floor_arcs], minlength=net.n_reviewers
    )
    senior = net.pair_senior[chosen]
    seniors = np.bincount(senior[senior >= 0], minlength=len(net.senior_paper))
    penalty = net.balance_step * float(np.sum(loads * (loads - 1) // 2)) / net.resolution
    return {
        "required": float(np.minimum(counts, minimum).sum()),
        "seniors": float(np.minimum(seniors, net.senior_need).sum()),
        "coverage": float(np.minimum(counts, reviews).sum()),
        "floors": float(np.minimum(loads, floor).sum()),
        "score": round(float(net.pair_score[chosen].sum()) - penalty, 6),
    }


def moved_pairs(
    net: PlanNetwork, used: np.ndarray, changed: np.ndarray, flow: np.ndarray
) -> np.ndarray:
    """The sorted pair positions carrying `flow`, from `used` (those carrying the earlier flow
    on the same arcs) and `changed` (sorted arcs where the two flows may differ)."""
    block = net.pair_arcs
    inside = changed[(changed >= block.start) & (changed < block.stop)] - block.start
    stay = used[~contains(used, inside)]
    now = inside[flow[block.start + inside] > 0]
    # Two sorted runs, disjoint: the stable sort merges them.
    return np.sort(np.concatenate([stay, now]), kind="stable")


def _run(session: Session, net: PlanNetwork, warm: PlanOutcome | None = None) -> CostFlowResult:
    """Solve one network; a hard rule that cannot be met becomes a PlanInputError."""
    start = None
    if warm is not None and warm.flow is not None and same_cost_scale(warm.network, net):
        start = warm_start_for(warm.network, warm.flow, warm.potentials, net)
    return _solve_network(session, net, start)


def _resolve(
    session: Session, warm: PlanOutcome, patch: NetworkPatch
) -> tuple[CostFlowResult, KeptFlow | None]:
    """Solve a patched network from the earlier optimum on the same arcs.

    The one place a patched network is solved: `patch.arcs` with their new capacities, lower
    bounds and costs are all that differ from `warm.network`, so the earlier optimum's kept
    residual state is patched and re-solved from the deficits the change left (work in
    proportion to the change). Where that gives up (a change whose repairs spread over the
    whole network) or finds the bounds unmeetable, the network is solved cold, which also
    words the cut for the chair. Returns the result and the state to keep (None when cold).
    """
    state = warm.kept_flow()
    if state is not None:
        pending = state.patched(
            patch.arcs, capacities=patch.capacities, lower=patch.lower, costs=patch.costs
        )
        try:
            result = pending.resolve()
        except InfeasibleError:
            result = None
        if result is not None:
            return result, pending
    return _solve_network(session, patch.network, None), None


def _solve_network(
    session: Session, net: PlanNetwork, start: WarmStart | None
) -> CostFlowResult:
    """One min-cost flow solve of `net` from `start`; an unmet hard rule is a PlanInputError."""
    try:
        return min_cost_flow(
            net.n_nodes,
            net.tails,
            net.heads,
            net.capacities,
            net.costs,
            lower=net.lower,
            warm=start,
        )
    except InfeasibleError as error:
        if not net.senior_hard:
            raise PlanInputError(
                ["pins: the pinned pairs cannot all be kept together with the caps and limits"]
            ) from None
        side = np.asarray(error.source_side, dtype=bool)
        on_cut = [
            session.papers[int(i)].id
            for k, i in enumerate(net.senior_paper.tolist())
            if side[net.sink + 1 + k]
        ][:10]
        offered = np.bincount(
            net.pair_senior[net.pair_senior >= 0], minlength=len(net.senior_paper)
        )
        too_few = [
            f"{session.papers[int(i)].id} has {offered[k]} eligible seniors, needs "
            f"{net.senior_need[k]}"
            for k, i in enumerate(net.senior_paper.tolist())
            if offered[k] < net.senior_need[k]
        ][:10]
        if too_few:
            where = f" ({'; '.join(too_few)})"
        else:
            where = f" (papers on the failing cut: {', '.join(on_cut)})" if on_cut else ""
        raise PlanInputError(
            [
                "policy.senior_hard: the hard senior rule cannot be met with the eligible "
                f"seniors, their caps and the pins{where}; lower senior_min or make the rule a "
                "tier (senior_hard: false)"
            ]
        ) from None


def _violated_splits(
    session: Session, net: PlanNetwork, used: np.ndarray
) -> dict[tuple[int, str], tuple[int, int, int]]:
    """For relaxed mixed groups whose two parts together exceed the cap: (suggested senior
    share, least and most senior share the group's pins allow).

    The suggestion keeps the seniors, unless the paper keeps its senior need without them and
    the juniors' pairs score higher on average.
    """
    m = session.policy.max_per_institution
    if m is None or not net.relaxed_groups:
        return {}
    n_g = len(net.part_paper)
    inside = used & (net.pair_part >= 0)
    flow = np.bincount(net.pair_part[inside], minlength=n_g)
    gain = np.bincount(net.pair_part[inside], weights=net.pair_score[inside], minlength=n_g)
    pinned_in = np.bincount(net.pair_part[net.pair_pinned & (net.pair_part >= 0)], minlength=n_g)
    in_senior = used & (net.pair_senior >= 0)
    seniors = np.bincount(net.pair_senior[in_senior], minlength=len(net.senior_paper))
    senior_of_paper = {int(i): k for k, i in enumerate(net.senior_paper.tolist())}
    parts: dict[tuple[int, str], dict[int, int]] = {}
    # A part carries at most m, so only a group whose two parts both carry flow can exceed m:
    # the rest are skipped before the loop (tens of thousands of parts on a large venue).
    relaxed = np.asarray(net.relaxed_groups, dtype=np.int64)
    carrying = relaxed[flow[relaxed] > 0]
    for g in carrying.tolist():
        key = (int(net.part_paper[g]), net.part_institution[g])
        parts.setdefault(key, {})[int(net.part_senior[g])] = g
    chosen: dict[tuple[int, str], tuple[int, int, int]] = {}
    for key, by_part in parts.items():
        s, j = by_part.get(1), by_part.get(0)
        used_s = int(flow[s]) if s is not None else 0
        used_j = int(flow[j]) if j is not None else 0
        if used_s + used_j <= m:
            continue
        pinned_s = int(pinned_in[s]) if s is not None else 0
        pinned_j = int(pinned_in[j]) if j is not None else 0
        k = min(used_s, m - pinned_j)
        node = senior_of_paper.get(key[0])
        others = int(seniors[node]) - used_s if node is not None else 0
        if (
            node is not None
            and others >= int(net.senior_need[node])
            and used_j
            and used_s
            and gain[j] / used_j > gain[s] / used_s
        ):
            k = max(pinned_s, m - min(used_j, m))
        chosen[key] = (k, pinned_s, m - pinned_j)
    return chosen


@dataclass
class _Node:
    """A solved network of one institution split."""

    net: PlanNetwork
    result: CostFlowResult
    split: dict[tuple[int, str], int]
    violated: dict[tuple[int, str], tuple[int, int, int]]


def _solve_split(
    session: Session,
    threshold: float | None,
    split: dict[tuple[int, str], int],
    conflicts: ConflictSet,
    earlier: Plan | None,
    warm: PlanOutcome | None = None,
) -> _Node:
    net = build_network(
        session,
        institution_split=split,
        threshold=threshold,
        conflicts=conflicts,
        earlier=earlier,
    )
    result = _run(session, net, warm)
    used = result.flow[net.pair_arcs] > 0
    return _Node(net, result, split, _violated_splits(session, net, used))


def _lex(tiers: dict[str, int]) -> tuple[int, ...]:
    return tuple(tiers[name] for name in EXACT_TIERS)


def _float_bound(
    root: _Node, final: _Node, proof: ExactResult
) -> dict[str, float]:
    """The program's integer bound in the plan's tier units; tiers below the open one keep the
    larger of the relaxation's and the plan's values, with the measured gap beside them."""
    relaxed = tier_values(root.net, root.result.flow[root.net.pair_arcs] > 0)
    mine = tier_values(final.net, final.result.flow[final.net.pair_arcs] > 0)
    bound = {name: max(relaxed[name], mine[name]) for name in OBJECTIVE_TIERS}
    for name, value in proof.bound.items():
        if name == "score":
            bound[name] = round(value / root.net.resolution, 6)
        elif name in bound:
            bound[name] = value
    return {**bound, "gap": proof.gap}


def _solve_rules(
    session: Session,
    threshold: float | None,
    split: dict[tuple[int, str], int],
    conflicts: ConflictSet,
    earlier: Plan | None = None,
    warm: PlanOutcome | None = None,
) -> tuple[
    PlanNetwork, CostFlowResult, dict[tuple[int, str], int], dict[str, float], ExactResult | None
]:
    """Solve, with mixed institution groups split exactly by a lexicographic MIP where needed.

    A relaxed network (mixed groups' parts capped at m each) is solved first; if its optimum
    keeps the institution rule it is optimal (no proof beyond the flow's is needed). Otherwise a
    greedy dive (splitting every violated group at once) gives a plan that keeps the rule, and
    `plan.exact.solve_exact` settles the tiers on which relaxation and dive differ, choosing how
    every mixed group shares its cap; the flow engine then plans that split, so the plan keeps
    its dual certificate. Returns the network, its result, its split, the bound in tier units
    ({} when proven optimal) and the program's proof (None when the flow alone was exact).
    """
    root = _solve_split(session, threshold, dict(split), conflicts, earlier, warm)
    if not root.violated:
        return root.net, root.result, root.split, {}, None
    best = root
    while best.violated:
        merged = {**best.split, **{key: k for key, (k, _, _) in best.violated.items()}}
        best = _solve_split(session, threshold, merged, conflicts, earlier)
    m = int(session.policy.max_per_institution or 0)
    upper = exact_tiers(root.net, root.result.flow[root.net.pair_arcs] > 0, m)
    lower = exact_tiers(root.net, best.result.flow[best.net.pair_arcs] > 0, m)
    proof = solve_exact(
        root.net, m, root.result.flow, root.result.potentials, upper, lower, dict(best.split)
    )
    final = best
    if proof.solved:
        candidate = _solve_split(session, threshold, proof.split, conflicts, earlier)
        if not candidate.violated:
            found = exact_tiers(root.net, candidate.result.flow[candidate.net.pair_arcs] > 0, m)
            if _lex(found) >= _lex(lower):
                final = candidate
            if proof.proven and _lex(found) != _lex(proof.tiers):
                # The plan on the program's split must reach the program's optimum exactly;
                # otherwise nothing is proven and the relaxation stays the bound.
                proof = replace(
                    proof,
                    proven=False,
                    status="the flow on the program's split differs from the program's optimum",
                    gap=float("nan"),
                    bound={k: float(v) for k, v in upper.items()},
                )
    if proof.proven:
        return final.net, final.result, final.split, {}, proof
    return final.net, final.result, final.split, _float_bound(root, final, proof), proof


def _bottleneck(
    session: Session,
    net: PlanNetwork,
    base: dict[str, float],
    split: dict[tuple[int, str], int],
    earlier: Plan | None = None,
    proof: ExactResult | None = None,
) -> tuple[
    float | None,
    PlanNetwork,
    CostFlowResult,
    dict[tuple[int, str], int],
    dict,
    ExactResult | None,
]:
    """The highest score threshold keeping required coverage, seniors and coverage optimal."""
    thresholds = score_thresholds(net)
    if len(thresholds) == 0:
        result = _run(session, net)
        return None, net, result, split, {}, proof
    # The max-flow pruning runs on the relaxed network without seniors, whose maximum flows
    # bound the plan's coverage tiers from above: a threshold is reachable only if they still
    # reach the plan's figures (the relaxation's own maximum may lie above the real optimum
    # where the rules cross or seniors rank above coverage, so it is not the target).
    relaxed = build_network(session, conflicts=net.conflicts) if split else net
    target = (base["required"], base["coverage"])
    top = highest_threshold(
        thresholds,
        lambda t: all(a >= b for a, b in zip(coverage_flows(relaxed, t), target, strict=True)),
    )

    def solved(t: float) -> tuple | None:
        try:
            return _solve_rules(session, t, {}, net.conflicts, earlier)
        except PlanInputError:
            # A hard senior rule that the remaining pairs cannot meet: the threshold is too high.
            return None

    def keeps(attempt: tuple | None) -> bool:
        if attempt is None:
            return False
        values = tier_values(attempt[0], attempt[1].flow[attempt[0].pair_arcs] > 0)
        return all(values[k] >= base[k] for k in ("required", "seniors", "coverage"))

    attempt = solved(float(thresholds[top]))
    if not keeps(attempt):
        cache: dict[int, tuple | None] = {}

        def reaches(t: float) -> bool:
            k = int(np.searchsorted(thresholds, t))
            cache[k] = solved(t)
            return keeps(cache[k])

        top = highest_threshold(thresholds[:top], reaches)
        attempt = cache.get(top)
        if attempt is None:
            # The lowest threshold keeps every unpinned pair, so it is always feasible.
            attempt = _solve_rules(session, float(thresholds[top]), {}, net.conflicts, earlier)
    net_t, result_t, split_t, bound_t, proof_t = attempt
    return float(thresholds[top]), net_t, result_t, split_t, bound_t, proof_t


def _proof_note(proof: ExactResult) -> str:
    """The method's note on the crossing rules: the MIP's status and gap."""
    if proof.proven:
        linear = (
            f"; {', '.join(proof.by_bound)} proven by the linear relaxation's checked bound, "
            "met by an integral solution"
            if proof.by_bound
            else ""
        )
        return (
            "; institution groups that mix seniors and juniors shared out by a lexicographic MIP "
            f"(HiGHS: optimal, gap 0, {len(proof.solved)} tier(s) solved{linear})"
        )
    if not proof.solved:
        return (
            "; institution groups that mix seniors and juniors shared out by a greedy dive, the "
            f"exact MIP {proof.status} (relative gap {proof.gap:.4g}; a bound is reported)"
        )
    return (
        "; institution groups that mix seniors and juniors shared out by a lexicographic MIP "
        f"(HiGHS stopped: {proof.status}; gap {proof.gap:.4g}; a bound is reported)"
    )


def _decode(
    session: Session,
    net: PlanNetwork,
    result: CostFlowResult,
    now: datetime,
    reuse: PlanRows | None = None,
    demands: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None = None,
    used: np.ndarray | None = None,
) -> tuple[Plan, LeadChoice | None, PlanRows]:
    """The plan of an optimal flow (pair arcs with flow > 0 only), its leads chosen when the
    policy asks for them; `reuse` holds an earlier plan's rows of the same entities, `used`
    the sorted positions of the pair arcs with flow > 0 when already worked out."""
    chosen = np.flatnonzero(result.flow[net.pair_arcs] > 0) if used is None else used
    reviewer = net.pair_reviewer[chosen]
    paper = net.pair_paper[chosen]
    score = net.pair_score[chosen]
    return assemble_rows(session, reviewer, paper, score, now, METHOD, reuse, demands)


def _patched_solve(
    session: Session, keep_from: Plan | None, warm: PlanOutcome | None
) -> tuple[PlanNetwork, CostFlowResult, NetworkPatch, KeptFlow | None] | None:
    """The solve of the warm outcome's network patched for this session, when a patch can
    follow the change and the patched optimum keeps the institution rule (else None), with
    the kept state of its optimum when it was re-solved from the earlier one's."""
    if (
        warm is None
        or warm.planned is None
        or warm.flow is None
        or warm.proof is not None
        or warm.bottleneck is not None
    ):
        return None
    patch = patched_network(
        warm.network,
        warm.planned,
        session,
        keep_from,
        old_plan=warm.plan,
        old_flow=warm.flow,
        # Only when readied (built with the kept state, or by the patch that made `warm`):
        # building them here would cost the full pass they save.
        old_arrays=warm.kept.arrays,
        old_used=warm.pairs_used,
    )
    if patch is None:
        return None
    result, state = _resolve(session, warm, patch)
    net = patch.network
    # (`_violated_splits` is empty without the rule or relaxed groups: skip the pass over pairs.)
    if (
        session.policy.max_per_institution is not None
        and net.relaxed_groups
        and _violated_splits(session, net, result.flow[net.pair_arcs] > 0)
    ):
        # Mixed institution groups to share out: the exact path works on built networks.
        return None
    return net, result, patch, state


def make_plan(
    session: Session,
    *,
    fresh: bool = False,
    earlier: Plan | None = None,
    now: datetime | None = None,
    warm: PlanOutcome | None = None,
    patch: bool = True,
) -> PlanOutcome:
    """Solve the session's lexicographic objective exactly and return the checked plan.

    A re-plan keeps the pairs of `earlier` (default: the session's current plan) as a tier just
    above score, so it moves as few reviews as coverage and floors allow; `fresh` ignores it.
    With `warm` (the outcome of an earlier plan, before a small change such as a withdrawal, a
    cap change or a new conflict) the solver restarts from that plan's flow and potentials; the
    result is just as optimal and checked. Where `plan.patch` can follow the change (and
    `patch` is on), the earlier network is patched instead of built anew.
    """
    keep_from = None if fresh else (earlier if earlier is not None else session.plan)
    patched = _patched_solve(session, keep_from, warm) if patch else None
    state: KeptFlow | None = None
    if patched is not None:
        net, result, _, state = patched
        split: dict[tuple[int, str], int] = {}
        bound: dict[str, float] = {}
        proof: ExactResult | None = None
    else:
        net, result, split, bound, proof = _solve_rules(
            session, None, {}, conflict_pairs(session), keep_from, warm
        )
    bottleneck = None
    if session.policy.bottleneck:
        base = tier_values(net, result.flow[net.pair_arcs] > 0)
        bottleneck, net, result, split, bound, proof = _bottleneck(
            session, net, base, split, keep_from, proof
        )
        state = None
    # The pairs carrying flow, found once for the tier values and the decoding: after a
    # re-solve from the kept state, from the earlier pairs and the few edges it changed.
    if patched is not None and state is not None and warm is not None and (
        warm.pairs_used is not None
    ):
        used = moved_pairs(net, warm.pairs_used, state.changed_edges(), result.flow)
    else:
        used = np.flatnonzero(result.flow[net.pair_arcs] > 0)
    final = tier_values(net, used)
    relaxed = bound if bound != final else {}
    plan, leads, rows = _decode(
        session,
        net,
        result,
        now or datetime.now(UTC),
        warm.rows if patched is not None and warm is not None else None,
        patched[2].demands if patched is not None else None,
        used,
    )
    if proof is not None:
        plan = plan.model_copy(update={"method": plan.method + _proof_note(proof)})
    if net.kept is not None or net.resolution != SCORE_RESOLUTION:
        plan = plan.model_copy(
            update={
                "method": plan.method
                + (", keeping earlier pairs" if net.kept is not None else "")
                + (
                    f", scores in steps of 1/{net.resolution} to fit the tier weights"
                    if net.resolution != SCORE_RESOLUTION
                    else ""
                )
            }
        )
    # The checker decides on its own what of the earlier check still holds (it compares the
    # sessions itself); the planner's view of the change is not passed on.
    check_state = check_plan(
        session,
        plan,
        result.potentials,
        network=net,
        base=warm.check_state if warm is not None else None,
    )
    before = None
    if session.policy.balance > 0:
        plain = session.model_copy(
            update={"policy": session.policy.model_copy(update={"balance": 0.0, "max_leads": 0})}
        )
        other = make_plan(plain, fresh=fresh, earlier=earlier, now=now)
        before = np.bincount(
            [session.reviewer_index()[a.reviewer] for a in other.plan.assignments],
            minlength=len(session.reviewers),
        )
    extra = {
        "checked": True,
        "bottleneck": bottleneck,
        "loads_before_balance": None if before is None else [int(x) for x in before],
        "bound": relaxed or None,
    }
    return PlanOutcome(
        plan=plan.model_copy(update=extra),
        network=net,
        potentials=result.potentials,
        flow=result.flow,
        leads=leads,
        bottleneck=bottleneck,
        relaxed_bound=relaxed,
        loads_before_balance=before,
        tiers=final,
        proof=proof,
        planned=session,
        rows=rows,
        patched=patched is not None,
        checked_conflicts=check_state.conflicts,
        check_state=check_state,
        pairs_used=used,
        kept=_KeptSlot(state, patched[2].arrays if patched is not None else None),
    )
