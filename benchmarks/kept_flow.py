"""A kept min-cost flow re-solved after a 1 % withdrawal, beside a cold and a warm solve.

    python benchmarks/kept_flow.py                 # loose, tight and scarce at size L
    python benchmarks/kept_flow.py --sizes M,L --repeats 5

For each family the planner's own network (`build_network` of the benchmark session) is solved
cold and kept (`KeptFlow`); then 1 % of the reviewers withdraw (`withdrawal`): their source and
pair arcs get capacity 0 on the SAME topology. Three solves of that changed network, in this
one process on the same arrays, each the median of `--repeats` runs after a warm-up run:

- kept: `parent.patched(arcs, capacities=0).resolve()` (the copy of the residual capacities
  included; the patched state is new each run, the parent stays as it was), followed by the
  cold solve when the re-solve gives up (its work budget), as a caller would do;
- cold: `min_cost_flow` on the changed arrays;
- warm: `min_cost_flow(..., warm=WarmStart(parent flow, parent potentials))`.

All three must reach the same optimal cost. Ratios are against the cold solve (below 1: faster).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

from instances import make_instance, make_session, withdrawal  # noqa: E402

from review_alloc.flow import KeptFlow, WarmStart, min_cost_flow, warm_up  # noqa: E402
from review_alloc.plan import build_network  # noqa: E402


def median_time(run: Callable[[], Any], repeats: int) -> tuple[float, Any]:
    """Run once to warm up, then `repeats` times; the median seconds and the last result."""
    result = run()
    times = []
    for _ in range(repeats):
        began = time.perf_counter()
        result = run()
        times.append(time.perf_counter() - began)
    return statistics.median(times), result


def bench(family: str, size: str, repeats: int) -> dict[str, Any]:
    """Time kept, cold and warm re-solves of one family's network after a 1 % withdrawal."""
    inst = make_instance(family, size)
    net = build_network(make_session(inst))
    began = time.perf_counter()
    first = min_cost_flow(
        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, lower=net.lower
    )
    first_t = time.perf_counter() - began
    began = time.perf_counter()
    parent = KeptFlow.from_solution(
        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, net.lower,
        first.flow, first.potentials,
    )
    keep_t = time.perf_counter() - began

    gone = withdrawal(inst)
    pair_arcs = np.arange(net.pair_arcs.start, net.pair_arcs.stop)
    floor_arcs = np.arange(net.floor_arcs.start, net.floor_arcs.stop)
    rest_arcs = np.arange(net.rest_arcs.start, net.rest_arcs.stop)
    arcs = np.concatenate([
        floor_arcs[np.isin(net.floor_arc_reviewer, gone)],
        rest_arcs[np.isin(net.rest_arc_reviewer, gone)],
        pair_arcs[np.isin(net.pair_reviewer, gone)],
    ])
    zeros = np.zeros(len(arcs), dtype=np.int64)
    caps = net.capacities.copy()
    caps[arcs] = 0
    # The benchmark sessions pin nothing: every lower bound is 0 and stays so.
    assert not net.lower.any()
    lower = net.lower

    def kept() -> Any:
        # What a caller does: the kept re-solve, and the cold solve if it gives up.
        state = parent.patched(arcs, capacities=zeros)
        result = state.resolve()
        kept.work = state.last_work  # type: ignore[attr-defined]
        kept.gave_up = result is None  # type: ignore[attr-defined]
        return cold() if result is None else result

    def cold() -> Any:
        return min_cost_flow(net.n_nodes, net.tails, net.heads, caps, net.costs, lower=lower)

    start = WarmStart(flow=first.flow, potentials=first.potentials)

    def warm() -> Any:
        return min_cost_flow(
            net.n_nodes, net.tails, net.heads, caps, net.costs, lower=lower, warm=start
        )

    began = time.perf_counter()
    patched = parent.patched(arcs, capacities=zeros)
    patch_t = time.perf_counter() - began
    began = time.perf_counter()
    attempt = patched.resolve()
    attempt_t = time.perf_counter() - began
    kept_t, kept_result = median_time(kept, repeats)
    cold_t, cold_result = median_time(cold, repeats)
    warm_t, warm_result = median_time(warm, repeats)
    assert kept_result.cost == cold_result.cost == warm_result.cost, (
        kept_result.cost, cold_result.cost, warm_result.cost)
    assert np.array_equal(parent.resolve().flow, first.flow), "the parent state changed"
    del patched, attempt
    return {
        "instance": inst.name,
        "edges": len(net.tails),
        "patched": len(arcs),
        "moved": int(np.abs(kept_result.flow - first.flow).sum()),
        "kept": kept_t,
        "cold": cold_t,
        "warm": warm_t,
        "patch": patch_t,
        "first": first_t,
        "keep": keep_t,
        "work": kept.work,  # type: ignore[attr-defined]
        "gave_up": kept.gave_up,  # type: ignore[attr-defined]
        "attempt": attempt_t,
    }


def main() -> None:
    """Run the families and sizes asked for and print the table."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="L", help="comma-separated sizes (S, M, L)")
    parser.add_argument("--families", default="loose,tight,scarce")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    warm_up()
    rows = [
        bench(family, size, args.repeats)
        for size in args.sizes.split(",")
        for family in args.families.split(",")
    ]
    print("Re-solve after 1 % of reviewers withdraw (median seconds; ratio = this / cold):")
    print(
        f"{'instance':<10} {'edges':>9} {'patched':>8} {'moved':>6} {'kept':>8} {'cold':>8} "
        f"{'warm':>8} {'kept/cold':>10} {'warm/cold':>10} {'patch':>7} {'kept work':>10}"
    )
    for r in rows:
        print(
            f"{r['instance']:<10} {r['edges']:>9} {r['patched']:>8} {r['moved']:>6} "
            f"{r['kept']:>8.3f} {r['cold']:>8.3f} {r['warm']:>8.3f} "
            f"{r['kept'] / r['cold']:>10.3f} {r['warm'] / r['cold']:>10.3f} "
            f"{r['patch']:>7.3f} {r['work'] / (2 * r['edges']):>9.2f}x"
            + (f"  gave up after {r['attempt']:.3f} s, then cold" if r["gave_up"] else "")
        )
    print(
        "patch: the copy-on-write patch alone (in kept); kept work: the re-solve's work units "
        "(arcs read, 32 per node settled) as a multiple of the network's arcs. Keeping a cold "
        "optimum (one CSR build and a certificate check) took "
        + ", ".join(f"{r['instance']} {r['keep']:.2f} s" for r in rows)
        + "."
    )


if __name__ == "__main__":
    main()
