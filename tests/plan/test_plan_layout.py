"""The planner's module layout: no import circle in plan/, and overload arcs as the builder's
last arc block (the arcs and costs the separate pass used to append)."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np

from review_alloc.plan import build_network
from review_alloc.plan.overload import overload_allowances
from tests.plan.test_planner import random_session

PLAN = Path(__file__).resolve().parents[2] / "review_alloc" / "plan"


def _plan_imports() -> dict[str, set[str]]:
    """Module → the plan modules it imports anywhere in its source (TYPE_CHECKING included)."""
    names = {}
    for f in PLAN.rglob("*.py"):
        parts = f.relative_to(PLAN.parent.parent).with_suffix("").parts
        names[".".join(parts[:-1] if parts[-1] == "__init__" else parts)] = f
    graph: dict[str, set[str]] = {}
    for name, f in names.items():
        found: set[str] = set()
        for node in ast.walk(ast.parse(f.read_text())):
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                found.add(node.module)
                found.update(f"{node.module}.{a.name}" for a in node.names)
            elif isinstance(node, ast.Import):
                found.update(a.name for a in node.names)
        graph[name] = {d for d in found if d in names and d != name}
    return graph


def test_no_module_of_plan_imports_itself_through_others() -> None:
    graph = _plan_imports()
    assert "review_alloc.plan.overload" in graph["review_alloc.plan.network"]
    for start in graph:
        seen: set[str] = set()
        todo = list(graph[start])
        while todo:
            m = todo.pop()
            assert m != start, f"{start} imports itself through {sorted(seen)}"
            if m not in seen:
                seen.add(m)
                todo.extend(graph[m])


def test_overload_arcs_are_the_last_block_from_source_to_each_allowed_reviewer() -> None:
    session = random_session(3)
    allowed = session.model_copy(
        update={"policy": session.policy.model_copy(update={"overload_allowance": 2})}
    )
    plain, net = build_network(session), build_network(allowed)
    allowance = overload_allowances(allowed)
    reviewers = np.flatnonzero(allowance > 0)
    assert len(reviewers) > 0
    block = net.overload_arcs
    assert (block.start, block.stop) == (len(net.tails) - len(reviewers), len(net.tails))
    assert np.array_equal(net.overload_reviewers, reviewers)
    assert np.all(net.tails[block] == net.source)
    assert np.array_equal(net.heads[block], 1 + reviewers)
    assert np.array_equal(net.capacities[block], allowance[reviewers])
    assert np.all(net.lower[block] == 0)
    assert len(np.unique(net.costs[block])) == 1 and net.costs[block][0] > 0
    # Without an allowance there is no overload block and every other block is where it was.
    assert plain.overload_arcs == slice(0, 0) and len(plain.overload_reviewers) == 0
    assert net.group_arcs.stop == block.start
    assert plain.pair_arcs == net.pair_arcs and plain.group_arcs == net.group_arcs
