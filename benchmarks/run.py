"""Speed and memory of the engine, side by side with scipy, OR-Tools and HiGHS.

    python benchmarks/run.py                  # sizes S and M, every family
    python benchmarks/run.py --sizes L        # the large instances (a few minutes)
    python benchmarks/run.py --sizes S,M,L --write-results
    python benchmarks/run.py --sizes L --only-orders   # engine vs references in every order

Every comparison runs in this one process on the same arrays, after a warm-up run, and reports
the median of `--repeats` runs (3 by default) and the ratio ours / reference (below 1: we are
faster). Results go to `benchmarks/results/latest.json`; `--write-results` also puts the
tables and the machine they ran on into `benchmarks/RESULTS.md`, each between its marker
comments (`marker`), keeping every hand-written line outside them. Timings are wall-clock
seconds; a busy machine makes them noisy, which is why every pair runs back to back.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

from instances import (  # noqa: E402
    FAMILIES,
    ORDERS,
    SIZES,
    Instance,
    edge_order,
    make_instance,
    make_session,
    max_flow_arrays,
    replan_case,
)

from review_alloc.flow import max_flow, min_cost_flow, warm_up  # noqa: E402
from review_alloc.plan import build_network, make_plan  # noqa: E402
from review_alloc.plan.network import PlanNetwork  # noqa: E402
from review_alloc.plan.warmstart import warm_start_for  # noqa: E402


def median_time(
    run: Callable[[], Any], repeats: int, warm_up_run: bool = True
) -> tuple[float, Any]:
    """Run once to warm up, then `repeats` times; return the median seconds and the last result."""
    result = run() if warm_up_run else None
    times = []
    for _ in range(repeats):
        began = time.perf_counter()
        result = run()
        times.append(time.perf_counter() - began)
    return statistics.median(times), result


def median_times(run: Callable[[], Any], repeats: int) -> tuple[float, float, Any]:
    """`median_time` with this thread's CPU seconds too: (median wall, median CPU, result).

    On a machine shared with other work the wall-clock time includes waiting for a core; the
    thread's CPU time does not (every solver compared runs in one thread).
    """
    result = run()
    walls, cpus = [], []
    for _ in range(repeats):
        began, began_cpu = time.perf_counter(), time.thread_time()
        result = run()
        cpus.append(time.thread_time() - began_cpu)
        walls.append(time.perf_counter() - began)
    return statistics.median(walls), statistics.median(cpus), result


# --- reference solvers -------------------------------------------------------------------------


def scipy_max_flow(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                   s: int, t: int) -> Callable[[], int]:
    """scipy.sparse.csgraph.maximum_flow(method="dinic") on the same edges (CSR built once)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import maximum_flow

    graph = csr_matrix((caps.astype(np.int32), (tails, heads)), shape=(n, n))
    graph.sum_duplicates()
    return lambda: int(maximum_flow(graph, s, t, method="dinic").flow_value)


def scipy_max_flow_from_edges(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                              s: int, t: int) -> Callable[[], int]:
    """scipy's Dinic timed with its CSR built from the edge list, as ours is (for context)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import maximum_flow

    def run() -> int:
        graph = csr_matrix((caps.astype(np.int32), (tails, heads)), shape=(n, n))
        graph.sum_duplicates()
        return int(maximum_flow(graph, s, t, method="dinic").flow_value)

    return run


def ortools_max_flow(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                     s: int, t: int) -> Callable[[], int]:
    """OR-Tools SimpleMaxFlow, arcs added from the same arrays on every run."""
    from ortools.graph.python import max_flow as ortools_mf

    def run() -> int:
        solver = ortools_mf.SimpleMaxFlow()
        solver.add_arcs_with_capacity(tails, heads, caps)
        status = solver.solve(s, t)
        assert status == solver.OPTIMAL, status
        return int(solver.optimal_flow())

    return run


def ortools_min_cost(net: PlanNetwork | CostNetwork) -> Callable[[], int]:
    """OR-Tools SimpleMinCostFlow on the planner's circulation (lower bounds shifted out)."""
    from ortools.graph.python import min_cost_flow as ortools_mcf

    low = net.lower
    need = np.zeros(net.n_nodes, np.int64)
    np.subtract.at(need, net.tails, low)
    np.add.at(need, net.heads, low)
    nodes = np.arange(net.n_nodes)

    def run() -> int:
        solver = ortools_mcf.SimpleMinCostFlow()
        solver.add_arcs_with_capacity_and_unit_cost(
            net.tails, net.heads, net.capacities - low, net.costs
        )
        solver.set_nodes_supplies(nodes, need)
        status = solver.solve()
        assert status == solver.OPTIMAL, status
        return int(solver.optimal_cost()) + int(low @ net.costs)

    return run


@dataclass(frozen=True)
class CostNetwork:
    """The arrays of a circulation with costs: the planner's network with its edges reordered."""

    n_nodes: int
    tails: np.ndarray
    heads: np.ndarray
    capacities: np.ndarray
    lower: np.ndarray
    costs: np.ndarray

    @classmethod
    def reordered(cls, net: PlanNetwork, order: np.ndarray) -> CostNetwork:
        """The same edges as `net`, listed in `order`."""
        return cls(net.n_nodes, net.tails[order], net.heads[order], net.capacities[order],
                   net.lower[order], net.costs[order])


def highs_min_cost(net: PlanNetwork) -> Callable[[], int]:
    """HiGHS through scipy.optimize.linprog on the flow LP of the same circulation."""
    from scipy.optimize import linprog
    from scipy.sparse import coo_matrix

    m = len(net.tails)
    rows = np.concatenate([net.tails, net.heads])
    cols = np.concatenate([np.arange(m), np.arange(m)])
    vals = np.concatenate([np.ones(m), -np.ones(m)])
    incidence = coo_matrix((vals, (rows, cols)), shape=(net.n_nodes, m)).tocsr()
    bounds = np.column_stack([net.lower, net.capacities]).astype(float)

    def run() -> int:
        result = linprog(net.costs.astype(float), A_eq=incidence,
                         b_eq=np.zeros(net.n_nodes), bounds=bounds, method="highs")
        assert result.status == 0, result.message
        return int(round(result.fun))

    return run


def ortools_plan(inst: Instance) -> Callable[[], int]:
    """The same pipeline with OR-Tools as the solver: session -> network -> solve -> pairs."""
    session = make_session(inst)

    def run() -> int:
        net = build_network(session)
        ortools_min_cost(net)()
        return len(net.tails)

    return run


_ORTOOLS_CSV_PIPELINE = """
import csv, sys
from ortools.graph.python import min_cost_flow
papers_csv, reviewers_csv, scores_csv, out_csv, reviews, must = sys.argv[1:7]
reviews, must = int(reviews), int(must)
with open(papers_csv, newline="") as f:
    papers = [row["paper_id"] for row in csv.DictReader(f)]
with open(reviewers_csv, newline="") as f:
    rows = list(csv.DictReader(f))
reviewers = [row["reviewer_id"] for row in rows]
caps = [int(row["cap"]) for row in rows]
paper_at = {p: i for i, p in enumerate(papers)}
reviewer_at = {r: j for j, r in enumerate(reviewers)}
n_r, n_p = len(reviewers), len(papers)
source, sink = n_r + n_p, n_r + n_p + 1
tails, heads, capacity, cost = [], [], [], []
with open(scores_csv, newline="") as f:
    for row in csv.DictReader(f):
        tails.append(reviewer_at[row["reviewer_id"]])
        heads.append(n_r + paper_at[row["paper_id"]])
        capacity.append(1)
        cost.append(-round(float(row["score"]) * 10000))
pairs = len(tails)
# Coverage first: the reviews a paper must get outweigh the rest, which outweigh any score.
unit = 10000 * (n_p * reviews + 1)
for j in range(n_r):
    tails.append(source); heads.append(j); capacity.append(caps[j]); cost.append(0)
for i in range(n_p):
    tails += [n_r + i, n_r + i]; heads += [sink, sink]
    capacity += [must, reviews - must]; cost += [-2 * unit, -unit]
total = sum(caps)
tails.append(source); heads.append(sink); capacity.append(total); cost.append(0)
solver = min_cost_flow.SimpleMinCostFlow()
solver.add_arcs_with_capacity_and_unit_cost(tails, heads, capacity, cost)
solver.set_node_supply(source, total)
solver.set_node_supply(sink, -total)
assert solver.solve() == solver.OPTIMAL
with open(out_csv, "w", newline="") as f:
    out = csv.writer(f)
    out.writerow(["paper_id", "reviewer_id"])
    for a in range(pairs):
        if solver.flow(a):
            out.writerow([papers[heads[a] - n_r], reviewers[tails[a]]])
"""


def write_instance_csvs(inst: Instance, folder: Path) -> tuple[Path, Path, Path]:
    """The instance as the papers, reviewers and scores CSV files a chair would import."""
    papers, reviewers, scores = (folder / f"{name}.csv" for name in ("papers", "reviewers",
                                                                      "scores"))
    papers.write_text("paper_id\n" + "".join(f"P{i:05d}\n" for i in range(inst.n_papers)))
    reviewers.write_text("reviewer_id,cap\n" + "".join(
        f"R{j:05d},{c}\n" for j, c in enumerate(inst.cap.tolist())))
    with scores.open("w") as out:
        out.write("reviewer_id,paper_id,score\n")
        step = 200_000
        for at in range(0, inst.n_pairs, step):
            chunk = slice(at, at + step)
            out.write("".join(
                f"R{j:05d},P{i:05d},{v:.4f}\n" for j, i, v in zip(
                    inst.pair_reviewer[chunk].tolist(), inst.pair_paper[chunk].tolist(),
                    inst.pair_score[chunk].tolist(), strict=True)))
    return papers, reviewers, scores


def bench_commands(inst: Instance, repeats: int) -> tuple[float, float]:
    """`review-alloc import`, `plan` and `export` from CSV files vs an OR-Tools script on them.

    Both run as fresh processes, as a chair would run them, and both end with the assignments
    written as CSV; the kernels are already in the on-disk cache. Returns the two medians.
    """
    from instances import MIN_REVIEWS, REVIEWS

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        papers, reviewers, scores = write_instance_csvs(inst, folder)
        session, ours_csv, ref_csv = folder / "s.json", folder / "ours.csv", folder / "ref.csv"
        cli = [sys.executable, "-m", "review_alloc"]
        steps = [
            [*cli, "import", "--papers", str(papers), "--reviewers", str(reviewers),
             "--scores", str(scores), "--unscored", "exclude", "--reviews", str(REVIEWS),
             "--min-reviews", str(MIN_REVIEWS), "--force", "-o", str(session)],
            [*cli, "plan", str(session)],
            [*cli, "export", str(session), "--to", str(ours_csv), "--force"],
        ]
        reference = [sys.executable, "-c", _ORTOOLS_CSV_PIPELINE, str(papers), str(reviewers),
                     str(scores), str(ref_csv), str(REVIEWS), str(MIN_REVIEWS)]
        env = dict(os.environ, PYTHONPATH=str(ROOT))

        def ours() -> None:
            for step in steps:
                subprocess.run(step, check=True, env=env, capture_output=True, timeout=3600)

        def ref() -> None:
            subprocess.run(reference, check=True, capture_output=True, timeout=3600)

        # Fresh processes each time, and the files were just written: nothing to warm up.
        ours_t, _ = median_time(ours, repeats, warm_up_run=False)
        ref_t, _ = median_time(ref, repeats, warm_up_run=False)
        # The same number of reviews assigned: both plans reach the most coverage there is.
        ours_rows = len(ours_csv.read_text().splitlines())
        ref_rows = len(ref_csv.read_text().splitlines())
        assert ours_rows == ref_rows, (ours_rows, ref_rows)
    return ours_t, ref_t


# --- one instance ------------------------------------------------------------------------------


def ours_max_flow(n: int, tails: np.ndarray, heads: np.ndarray, caps: np.ndarray,
                  s: int, t: int) -> Callable[[], int]:
    """Our max_flow on the given edges; the value."""
    return lambda: max_flow(n, tails, heads, caps, s, t).value


def ours_min_cost(net: PlanNetwork | CostNetwork) -> Callable[[], int]:
    """Our min_cost_flow on the planner's network."""
    return lambda: min_cost_flow(
        net.n_nodes, net.tails, net.heads, net.capacities, net.costs, lower=net.lower
    ).cost


def bench_instance(family: str, size: str, repeats: int) -> list[dict[str, Any]]:
    """Every comparison on one instance; one row per comparison."""
    inst = make_instance(family, size)
    rows: list[dict[str, Any]] = []

    def row(task: str, ours: float, ref_name: str, ref: float | None, **extra: Any) -> None:
        rows.append({
            "instance": inst.name, "task": task, "ours_s": ours, "reference": ref_name,
            "reference_s": ref, "ratio": None if ref is None else ours / ref, **extra,
        })
        shown = "" if ref is None else f"  {ref_name} {ref:.3f}s  ratio {ours / ref:.2f}"
        print(f"  {inst.name:10s} {task:22s} ours {ours:.3f}s{shown}", flush=True)

    n, tails, heads, caps, s, t = max_flow_arrays(inst)
    ours_t, ours_flow = median_time(lambda: max_flow(n, tails, heads, caps, s, t), repeats)
    for name, make in (("scipy dinic", scipy_max_flow), ("OR-Tools", ortools_max_flow)):
        ref_t, value = median_time(make(n, tails, heads, caps, s, t), repeats)
        assert value == ours_flow.value, (name, value, ours_flow.value)
        row("max flow", ours_t, name, ref_t, phases=ours_flow.phases)

    session = make_session(inst)
    net = build_network(session)
    ours_t, cost = median_time(ours_min_cost(net), repeats)
    ref_t, ref_cost = median_time(ortools_min_cost(net), repeats)
    assert cost == ref_cost, (cost, ref_cost)
    row("weighted (min-cost)", ours_t, "OR-Tools", ref_t)
    if size == "M":
        ref_t, ref_cost = median_time(highs_min_cost(net), 1)
        assert cost == ref_cost, (cost, ref_cost)
        row("weighted (min-cost)", ours_t, "HiGHS", ref_t)

    plan_t, outcome = median_time(lambda: make_plan(session), repeats)
    ref_t, _ = median_time(ortools_plan(inst), repeats)
    row("plan (make_plan)", plan_t, "OR-Tools pipeline", ref_t)
    ours_t, ref_t = bench_commands(inst, repeats)
    row("CSV -> plan -> CSV", ours_t, "OR-Tools script", ref_t)

    # A re-plan as the app makes it (see `replan_case`); the earlier re-plan's outcome is the
    # warm start.
    earlier, after = replan_case(inst, make_plan, outcome)
    outcome = earlier
    cold_t, cold = median_time(lambda: make_plan(after), repeats)
    warm_t, warm = median_time(lambda: make_plan(after, warm=outcome), repeats)
    w, c = warm.plan.figures, cold.plan.figures
    # Equal optima; the score sums may differ in the last bits when ties are broken apart.
    assert (w.required_coverage, w.coverage, w.floors_met) == (
        c.required_coverage, c.coverage, c.floors_met)
    assert abs(w.total_score - c.total_score) <= 1e-6 * max(1.0, abs(c.total_score))
    row("re-plan, 1% withdrawn", warm_t, "cold plan", cold_t)

    # The engine alone on the same changed network: warm from the earlier optimum vs cold.
    start = warm_start_for(outcome.network, outcome.flow, outcome.potentials, cold.network)
    changed = cold.network
    cold_t, cold_cost = median_time(ours_min_cost(changed), repeats)
    warm_t, warm_cost = median_time(lambda: min_cost_flow(
        changed.n_nodes, changed.tails, changed.heads, changed.capacities, changed.costs,
        lower=changed.lower, warm=start,
    ).cost, repeats)
    assert warm_cost == cold_cost, (warm_cost, cold_cost)
    row("re-solve, 1% withdrawn", warm_t, "cold solve", cold_t)
    return rows


def bench_orders(family: str, size: str, repeats: int, orders: list[str],
                 cost_repeats: int | None = None) -> list[dict[str, Any]]:
    """The engine against scipy's Dinic (max flow) and OR-Tools (min-cost flow) on the same
    instance with its edges listed in each order; one row per order. `cost_repeats` (default
    `repeats`) sets the runs of the slower min-cost comparison."""
    cost_repeats = repeats if cost_repeats is None else cost_repeats
    inst = make_instance(family, size)
    n, tails, heads, caps, s, t = max_flow_arrays(inst)
    net = build_network(make_session(inst))
    rows: list[dict[str, Any]] = []
    values: set[int] = set()
    costs: set[int] = set()
    for order in orders:
        perm = edge_order(tails, heads, order)
        o_tails, o_heads, o_caps = tails[perm], heads[perm], caps[perm]
        flow_t, flow_cpu, ours = median_times(
            ours_max_flow(n, o_tails, o_heads, o_caps, s, t), repeats)
        scipy_t, scipy_cpu, value = median_times(
            scipy_max_flow(n, o_tails, o_heads, o_caps, s, t), repeats)
        assert value == ours, (order, value, ours)
        values.add(value)
        built_t, _ = median_time(
            scipy_max_flow_from_edges(n, o_tails, o_heads, o_caps, s, t), repeats)

        row: dict[str, Any] = {
            "instance": inst.name, "order": order, "edges": len(tails),
            "max_flow_s": flow_t, "scipy_dinic_s": scipy_t, "max_flow_ratio": flow_t / scipy_t,
            "max_flow_cpu_ratio": flow_cpu / scipy_cpu, "scipy_with_csr_s": built_t,
            "min_cost_s": None, "ortools_s": None, "min_cost_ratio": None,
            "min_cost_cpu_ratio": None,
        }
        line = (f"  {inst.name:10s} {order:15s} max flow ours {flow_t:.3f}s scipy dinic "
                f"{scipy_t:.3f}s ratio {flow_t / scipy_t:.2f} (CPU {flow_cpu / scipy_cpu:.2f}; "
                f"with its CSR build {built_t:.3f}s, {flow_t / built_t:.2f})")
        if cost_repeats > 0:
            cost_net = CostNetwork.reordered(net, edge_order(net.tails, net.heads, order))
            cost_t, cost_cpu, cost = median_times(ours_min_cost(cost_net), cost_repeats)
            ortools_t, ortools_cpu, ref_cost = median_times(ortools_min_cost(cost_net),
                                                            cost_repeats)
            assert cost == ref_cost, (order, cost, ref_cost)
            costs.add(cost)
            row.update({
                "min_cost_s": cost_t, "ortools_s": ortools_t,
                "min_cost_ratio": cost_t / ortools_t,
                "min_cost_cpu_ratio": cost_cpu / ortools_cpu,
            })
            line += (f" | min-cost ours {cost_t:.3f}s OR-Tools {ortools_t:.3f}s ratio "
                     f"{cost_t / ortools_t:.2f} (CPU {cost_cpu / ortools_cpu:.2f})")
        rows.append(row)
        print(line, flush=True)
    # The order of the edges changes neither optimum.
    assert len(values) == 1 and len(costs) <= 1, (values, costs)
    return rows


# --- scaling, memory, compile ------------------------------------------------------------------


def bench_phases(sides: list[int], degree: int = 4, seed: int = 3) -> list[dict[str, Any]]:
    """Dinic phases on unit-capacity bipartite graphs of growing size, against sqrt(V)."""
    rows = []
    rng = np.random.default_rng(seed)
    for side in sides:
        left = np.repeat(np.arange(side), degree)
        right = rng.integers(0, side, side * degree)
        n = 2 * side + 2
        s, t = 0, n - 1
        tails = np.concatenate([np.zeros(side, np.int64), 1 + left, 1 + side + np.arange(side)])
        heads = np.concatenate([1 + np.arange(side), 1 + side + right, np.full(side, t)])
        caps = np.ones(len(tails), np.int64)
        result = max_flow(n, tails, heads, caps, s, t)
        rows.append({"nodes": n, "edges": len(tails), "phases": result.phases,
                     "phases_per_sqrt_v": result.phases / np.sqrt(n)})
        print(f"  unit bipartite V={n:>8d} E={len(tails):>9d} phases {result.phases:3d} "
              f"phases/sqrt(V) {result.phases / np.sqrt(n):.4f}", flush=True)
    return rows


_SESSION_WRITER = """
import sys
sys.path[:0] = [{root!r}, {here!r}]
from instances import make_instance, make_session
from review_alloc.model import save_session
save_session(make_session(make_instance({family!r}, {size!r})), {path!r})
"""

_MEMORY_PROBE = """
import resource, sys
sys.path.insert(0, {root!r})
from review_alloc.cli import main
code = main(["plan", {path!r}])
# VmHWM is this process's own peak; Linux carries ru_maxrss over from the forking parent, so a
# large benchmark process would inflate it.
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
try:
    with open("/proc/self/status") as status:
        peak = next(int(line.split()[1]) for line in status if line.startswith("VmHWM:"))
except (OSError, StopIteration):
    pass
print(code, peak)
"""


def bench_memory(size: str, family: str = "loose") -> dict[str, Any]:
    """Peak resident memory of `review-alloc plan` on a saved session, in a fresh process.

    The session is generated and saved by another process first, so that the peak is the
    command's own: loading the file, planning, checking and saving the plan back.
    """
    with tempfile.TemporaryDirectory() as folder:
        path = str(Path(folder) / f"{family}-{size}.json")
        writer = _SESSION_WRITER.format(
            root=str(ROOT), here=str(HERE), family=family, size=size, path=path
        )
        subprocess.run([sys.executable, "-c", writer], check=True, timeout=3600)
        code = _MEMORY_PROBE.format(root=str(ROOT), path=path)
        began = time.perf_counter()
        done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                              check=True, timeout=3600)
        seconds = time.perf_counter() - began
    exit_code, peak = (int(v) for v in done.stdout.split()[-2:])
    assert exit_code == 0, done.stdout[-2000:]
    # ru_maxrss is in KiB on Linux.
    result = {"instance": f"{family}-{size}", "peak_gib": peak / 2**20, "command_s": seconds}
    print(f"  peak memory of `review-alloc plan` on {family}-{size}: "
          f"{result['peak_gib']:.2f} GiB ({seconds:.1f} s in all)", flush=True)
    return result


_COMPILE_PROBE = """
import sys, time
sys.path.insert(0, {root!r})
began = time.perf_counter()
import review_alloc.flow as flow
imported = time.perf_counter()
flow.warm_up(parallel={parallel!r})
print(imported - began, time.perf_counter() - imported)
"""


def bench_compile() -> dict[str, Any]:
    """Kernel compile time with an empty cache (parallel and serial), then load time from it."""

    def probe(folder: str, parallel: bool) -> list[float]:
        env = dict(os.environ, NUMBA_CACHE_DIR=folder)
        code = _COMPILE_PROBE.format(root=str(ROOT), parallel=parallel)
        done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                              text=True, check=True, timeout=600)
        return [float(v) for v in done.stdout.split()[-2:]]

    with tempfile.TemporaryDirectory() as folder, tempfile.TemporaryDirectory() as serial:
        cold = probe(folder, True)
        cached = probe(folder, True)
        one_process = probe(serial, False)
    result = {"import_s": cold[0], "compile_cold_s": cold[1],
              "compile_cold_one_process_s": one_process[1],
              "load_from_cache_s": cached[1], "import_cached_s": cached[0]}
    print(f"  kernels: compile cold {result['compile_cold_s']:.2f}s (one process "
          f"{result['compile_cold_one_process_s']:.2f}s), load from cache "
          f"{result['load_from_cache_s']:.2f}s (import {result['import_cached_s']:.2f}s)",
          flush=True)
    return result


# --- report ------------------------------------------------------------------------------------


def machine() -> dict[str, Any]:
    """Where the numbers come from."""
    import numba
    import scipy

    cpu = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        cpu = platform.processor() or "unknown"
    versions = {"python": platform.python_version(), "numpy": np.__version__,
                "numba": numba.__version__, "scipy": scipy.__version__}
    try:
        import ortools

        versions["ortools"] = ortools.__version__
    except ImportError:
        versions["ortools"] = "missing"
    return {"cpus": os.cpu_count(), "cpu": cpu, "system": platform.platform(), **versions}


def _machine_line(report: dict[str, Any]) -> str:
    m = report["machine"]
    return (f"Machine: {m['cpus']} CPUs, {m['cpu']}; {m['system']}; Python {m['python']}, "
            f"numpy {m['numpy']}, numba {m['numba']}, scipy {m['scipy']}, "
            f"OR-Tools {m['ortools']}.")


def main_block(report: dict[str, Any]) -> str:
    """The generated text of the main comparison: machine, table, scaling, memory, compile."""
    lines = [
        f"Command: `{report['command']}` ({report['date']}).",
        "",
        _machine_line(report),
        "",
        f"Median wall-clock seconds of {report['repeats']} runs after a warm-up, in one process "
        "on the same arrays; ratio = ours / reference (below 1: ours is faster).",
        "",
        "| instance | task | ours (s) | reference | reference (s) | ratio |",
        "| --- | --- | ---: | --- | ---: | ---: |",
    ]
    for r in report["rows"]:
        lines.append(
            f"| {r['instance']} | {r['task']} | {r['ours_s']:.3f} | {r['reference']} | "
            f"{r['reference_s']:.3f} | {r['ratio']:.2f} |"
        )
    if report.get("phases"):
        lines += ["", "Dinic phases on unit-capacity bipartite graphs (degree 4):", "",
                  "| V | E | phases | phases / sqrt(V) |", "| ---: | ---: | ---: | ---: |"]
        for r in report["phases"]:
            lines.append(f"| {r['nodes']} | {r['edges']} | {r['phases']} | "
                         f"{r['phases_per_sqrt_v']:.4f} |")
    if report.get("memory"):
        mem = report["memory"]
        lines += ["", f"Peak memory of `review-alloc plan` on the saved {mem['instance']} "
                  f"session, in a fresh process: {mem['peak_gib']:.2f} GiB "
                  f"({mem['command_s']:.1f} s for load, plan, check and save)."]
    if report.get("compile"):
        c = report["compile"]
        lines += ["", f"Kernels: {c['compile_cold_s']:.2f} s to compile with an empty cache "
                  "(one child process beside this one; "
                  f"{c['compile_cold_one_process_s']:.2f} s in one), "
                  f"{c['load_from_cache_s']:.2f} s to load from the cache "
                  f"(package import {c['import_cached_s']:.2f} s)."]
    return "\n".join(lines) + "\n"


def orders_block(report: dict[str, Any]) -> str:
    """The generated text of the comparison in every edge order."""
    cost_repeats = report.get("order_cost_repeats")
    cost_repeats = report["repeats"] if cost_repeats is None else cost_repeats
    cost_text = (
        f"min-cost flow on the planner's network: median of {cost_repeats}, ours / OR-Tools"
        if cost_repeats > 0 else "min-cost flow left out of this run (`-` in its columns)"
    )
    lines = [
        f"Command: `{report['command']}` ({report['date']}).",
        "",
        _machine_line(report),
        "",
        f"Max flow: median of {report['repeats']} runs after a warm-up, ours / scipy's Dinic on "
        "a CSR graph built beforehand (and, for context, scipy timed with that build from the "
        f"same edge list); {cost_text}. Ratios of wall-clock seconds, and of the solving "
        "thread's CPU seconds (which leave out waiting for a core on a shared machine).",
        "",
        "| instance | order | max flow (s) | scipy dinic (s) | ratio | ratio (CPU) | scipy with "
        "CSR build (s) | min-cost (s) | OR-Tools (s) | ratio | ratio (CPU) |",
        "| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |",
    ]

    def cell(value: float | None, digits: int) -> str:
        return "-" if value is None else f"{value:.{digits}f}"

    for r in report["orders"]:
        lines.append(f"| {r['instance']} | {r['order']} | {r['max_flow_s']:.3f} | "
                     f"{r['scipy_dinic_s']:.3f} | {r['max_flow_ratio']:.2f} | "
                     f"{r['max_flow_cpu_ratio']:.2f} | {r['scipy_with_csr_s']:.3f} | "
                     f"{cell(r['min_cost_s'], 3)} | {cell(r['ortools_s'], 3)} | "
                     f"{cell(r['min_cost_ratio'], 2)} | {cell(r['min_cost_cpu_ratio'], 2)} |")
    return "\n".join(lines) + "\n"


def generated_blocks(report: dict[str, Any]) -> dict[str, str]:
    """Block name -> generated text, for the parts this run measured."""
    blocks = {}
    if report["rows"]:
        blocks["main"] = main_block(report)
    if report.get("orders"):
        blocks["orders"] = orders_block(report)
    return blocks


def marker(name: str, edge: str) -> str:
    """The comment line that opens (`edge` "begin") or closes ("end") a generated block."""
    return f"<!-- benchmarks/run.py {name} {edge}: generated, edit outside these lines -->"


def merge_results(text: str, blocks: dict[str, str]) -> str:
    """`text` (RESULTS.md) with each block put between its markers; everything else is kept.

    A block whose markers are not in the text yet is added at the end, markers included.
    """
    for name, body in blocks.items():
        begin, end = marker(name, "begin"), marker(name, "end")
        framed = f"{begin}\n{body}{end}"
        at = text.find(begin)
        until = text.find(end, at + len(begin)) if at >= 0 else -1
        if at >= 0 and until >= 0:
            text = text[:at] + framed + text[until + len(end):]
        else:
            text = text.rstrip("\n") + "\n\n" + framed + "\n"
    return text


def main(argv: list[str] | None = None) -> None:
    """Run the chosen benchmarks, print the table, write the JSON (and RESULTS.md)."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="S,M", help="comma-separated: S, M, L")
    parser.add_argument("--families", default=",".join(FAMILIES))
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--orders", default=",".join(ORDERS),
                        help="edge orders for the engine comparison: " + ", ".join(ORDERS))
    parser.add_argument("--order-cost-repeats", type=int, default=None,
                        help="runs of the min-cost comparison in every order (default --repeats; "
                             "0 leaves it out)")
    parser.add_argument("--only-orders", action="store_true",
                        help="run only the engine comparison in every order (no extras)")
    parser.add_argument("--no-extras", action="store_true",
                        help="skip the phase scaling, memory and compile measurements")
    parser.add_argument("--write-results", action="store_true",
                        help="also put the tables into benchmarks/RESULTS.md (between their "
                             "markers; the rest of the file is kept)")
    args = parser.parse_args(argv)
    sizes = [s.strip().upper() for s in args.sizes.split(",") if s.strip()]
    families = [f.strip() for f in args.families.split(",") if f.strip()]
    for size in sizes:
        if size not in SIZES:
            parser.error(f"unknown size {size!r}; choose from {', '.join(SIZES)}")
    for family in families:
        if family not in FAMILIES:
            parser.error(f"unknown family {family!r}; choose from {', '.join(FAMILIES)}")
    orders = [o.strip() for o in args.orders.split(",") if o.strip()]
    for order in orders:
        if order not in ORDERS:
            parser.error(f"unknown order {order!r}; choose from {', '.join(ORDERS)}")

    warm_up()
    report: dict[str, Any] = {
        "command": "python benchmarks/run.py " + " ".join(argv if argv is not None
                                                         else sys.argv[1:]),
        "date": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime()),
        "machine": machine(), "repeats": args.repeats, "rows": [], "orders": [],
        "order_cost_repeats": args.order_cost_repeats,
    }
    for size in sizes:
        for family in families:
            if not args.only_orders:
                report["rows"] += bench_instance(family, size, args.repeats)
            if orders:
                report["orders"] += bench_orders(family, size, args.repeats, orders,
                                                 args.order_cost_repeats)
    if not (args.no_extras or args.only_orders):
        report["phases"] = bench_phases([1_000, 4_000, 16_000, 64_000, 256_000])
        report["memory"] = bench_memory(sizes[-1])
        report["compile"] = bench_compile()
    report["peak_rss_gib_this_process"] = (
        resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20
    )

    out = HERE / "results"
    out.mkdir(exist_ok=True)
    (out / "latest.json").write_text(json.dumps(report, indent=2) + "\n")
    blocks = generated_blocks(report)
    print()
    print("\n".join(blocks.values()))
    if args.write_results:
        path = HERE / "RESULTS.md"
        old = path.read_text() if path.exists() else "# Benchmark results\n"
        path.write_text(merge_results(old, blocks))


if __name__ == "__main__":
    main()
