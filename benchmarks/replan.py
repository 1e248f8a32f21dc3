"""Re-plans from the open session's state: patched, as today (built anew), and cold.

    python benchmarks/replan.py                    # loose, tight, scarce at L, and the conference
    python benchmarks/replan.py --sizes M --repeats 1 --no-conference    # a quick look

On each family (benchmarks/instances.py) the session holds the plan of an earlier re-plan, made
after one withdrawal, whose outcome is the warm start (so the keep tier is on in both, as in
the app); then 1 % of the reviewers withdraw. Three ways to make the same plan run back to back
in this one process: a cold plan, the warm re-plan that builds the network anew and maps the
earlier flow onto it (`make_plan(..., patch=False)`, the path before `plan.patch`), and the
patched re-plan (`plan.patch`). On the conference sample, opened through the Workspace in a
temporary folder: withdraw one reviewer and re-plan (patched, and the same request unpatched),
a what-if preview raising one cap, and a fresh plan. Ratios are against the cold or fresh plan;
the patched re-plan's breakdown (cProfile, cumulative seconds, so with its overhead) says what
remains.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import shutil
import statistics
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

from instances import make_instance, make_session, replan_case  # noqa: E402

from review_alloc.flow import warm_up  # noqa: E402
from review_alloc.model import Session  # noqa: E402
from review_alloc.plan import make_plan  # noqa: E402

BREAKDOWN = (
    ("network patch", "patch.py", "patched_network"),
    ("solve (min_cost_flow)", "solve.py", "_resolve"),
    ("  residual CSR build", "residual.py", "build_with_terminals"),
    ("institution split test", "solve.py", "_violated_splits"),
    ("decode + assemble", "solve.py", "_decode"),
    ("  leads", "leads.py", "lead_mask"),
    ("  new assignments", "plans.py", "trusted_assignments"),
    ("  figures", "figures.py", "plan_figures"),
    ("checker", "checker.py", "check_plan"),
    ("  hard rules", "checker.py", "_hard_rule_problems"),
    ("  certificate", "checker.py", "_certificate_problems"),
    ("tier values", "solve.py", "tier_values"),
)


THREAD_CPU: dict[str, float] = {}
"""Median thread CPU seconds of the last `median_time` run of each label: on a shared machine
the wall times wander with the other processes' load, this thread's own work much less."""


def median_time(run: Callable[[], Any], repeats: int, label: str = "") -> tuple[float, Any]:
    """Run once to warm up, then `repeats` times; the median seconds and the last result (the
    median thread CPU seconds go to `THREAD_CPU[label]`)."""
    result = run()
    times, cpu = [], []
    for _ in range(max(repeats, 1)):
        began, began_cpu = time.perf_counter(), time.thread_time()
        result = run()
        times.append(time.perf_counter() - began)
        cpu.append(time.thread_time() - began_cpu)
    THREAD_CPU[label] = statistics.median(cpu)
    return statistics.median(times), result


def breakdown(run: Callable[[], Any]) -> list[str]:
    """Cumulative seconds of the named steps of one profiled run."""
    profile = cProfile.Profile()
    began = time.perf_counter()
    profile.runcall(run)
    total = time.perf_counter() - began
    stats = pstats.Stats(profile).stats  # type: ignore[attr-defined]
    lines = [f"    profiled total {total:.3f}s"]
    for label, file, name in BREAKDOWN:
        spent = sum(
            entry[3] for (path, _, func), entry in stats.items() if func == name
            and path.endswith(file)
        )
        lines.append(f"    {label:26s} {spent:.3f}s")
    return lines


def as_the_app_makes_it(before: Session, after: Session) -> Session:
    """`after` holding `before`'s own objects wherever they are equal, as a change made in the
    workspace leaves them (it copies only the entities it changes, and never the policy or the
    score table); the benchmark builds each session anew, which the app never does."""
    reviewers = [a if a == b else b for a, b in zip(before.reviewers, after.reviewers, strict=True)]
    papers = [a if a == b else b for a, b in zip(before.papers, after.papers, strict=True)]
    same_scores = (
        np.array_equal(before.scores.reviewer, after.scores.reviewer)
        and np.array_equal(before.scores.paper, after.scores.paper)
        and np.array_equal(before.scores.value, after.scores.value)
    )
    return after.model_copy(
        update={
            "reviewers": reviewers,
            "papers": papers,
            "policy": before.policy if before.policy == after.policy else after.policy,
            "scores": before.scores if same_scores else after.scores,
        }
    )


def family_rows(family: str, size: str, repeats: int) -> list[str]:
    """Cold plan, today's warm re-plan and the patched re-plan after 1 % withdraw."""
    inst = make_instance(family, size)
    earlier, after = replan_case(inst, make_plan, make_plan(make_session(inst)))
    after = as_the_app_makes_it(earlier.planned, after)
    # The workspace builds the earlier plan's kept residual state in a worker thread once that
    # plan is shown (`workspace.planning.ready_for_replan`); timed apart, it is not part of
    # the re-plan the chair waits for.
    started = time.perf_counter()
    earlier.kept_flow()
    kept_t = time.perf_counter() - started
    cold_t, cold = median_time(lambda: make_plan(after), repeats, "cold")
    today_t, today = median_time(
        lambda: make_plan(after, warm=earlier, patch=False), repeats, "today"
    )
    patched_t, patched = median_time(lambda: make_plan(after, warm=earlier), repeats, "patched")
    for other in (today, patched):
        for tier in ("required", "seniors", "coverage", "floors"):
            assert other.tiers[tier] == cold.tiers[tier], (tier, other.tiers, cold.tiers)
        assert abs(other.tiers["score"] - cold.tiers["score"]) <= 1e-6 * max(
            1.0, abs(cold.tiers["score"])
        )
    assert patched.patched and not today.patched
    name = f"{family} {size}"
    lines = [
        f"  {name:9s} cold plan {cold_t:.3f}s | warm re-plan, network built anew {today_t:.3f}s "
        f"({today_t / cold_t:.2f}x) | patched re-plan {patched_t:.3f}s "
        f"({patched_t / cold_t:.2f}x cold, {patched_t / today_t:.2f}x built anew)",
        f"  {'':9s} thread CPU: cold {THREAD_CPU['cold']:.3f}s | built anew "
        f"{THREAD_CPU['today']:.3f}s | patched {THREAD_CPU['patched']:.3f}s "
        f"({THREAD_CPU['patched'] / THREAD_CPU['cold']:.2f}x cold)",
        f"  {'':9s} kept state of the earlier plan, built after it was shown: {kept_t:.3f}s",
    ]
    lines += breakdown(lambda: make_plan(after, warm=earlier))
    return lines


def conference_rows(repeats: int) -> list[str]:
    """The conference sample through the Workspace: re-plan after a withdrawal, a what-if
    preview, a fresh plan."""
    from review_alloc.workspace import ChangeSet, Workspace, ready_for_replan

    with tempfile.TemporaryDirectory() as folder:
        os.environ["XDG_DATA_HOME"] = folder
        path = Path(folder) / "conference.json"
        shutil.copy(ROOT / "sample_sessions" / "conference.json", path)
        ws = Workspace.open(path)
        first = ws.solve()
        # As the app does once the plan is shown: the start of the next re-plan, readied in
        # the plan worker (the same session planned keeping the plan, and its kept state).
        began = time.perf_counter()
        successor = ready_for_replan(first)
        ready_t = time.perf_counter() - began
        ws.adopt_warm(first, successor)
        ws.withdraw_reviewer(ws.session.reviewers[3].id, "benchmark")
        began = time.perf_counter()
        after_fresh = ws.solve()
        first_t = time.perf_counter() - began
        ready_for_replan(after_fresh)
        patched_times, today_times, solve_times = [], [], []
        profile_lines: list[str] = []
        for k in range(max(repeats, 1)):
            active = [r.id for r in ws.session.reviewers if not r.withdrawn]
            ws.withdraw_reviewer(active[11 * (k + 1) % len(active)], "benchmark")
            request = ws.plan_request()
            began = time.perf_counter()
            make_plan(
                request.session,
                earlier=request.earlier,
                warm=request.warm,
                patch=False,
            )
            today_times.append(time.perf_counter() - began)
            began = time.perf_counter()
            outcome = request.run()
            patched_times.append(time.perf_counter() - began)
            assert outcome.patched
            ws.install_plan(outcome, request.session)
            if k == 0:
                profile_lines = breakdown(ws.plan_request().run)
        active = [r.id for r in ws.session.reviewers if not r.withdrawn]
        ws.withdraw_reviewer(active[5], "benchmark")
        began = time.perf_counter()
        ws.solve()
        solve_times.append(time.perf_counter() - began)
        what_if_t, preview = median_time(
            lambda: ws.what_if(ChangeSet(raise_caps={active[0]: 1})), repeats
        )
        fresh_t, _ = median_time(lambda: ws.plan_request(fresh=True).run(), min(repeats, 2))
        patched_t = statistics.median(patched_times)
        today_t = statistics.median(today_times)
        solve_t = statistics.median(solve_times)
        return [
            f"  conference: fresh plan {fresh_t:.3f}s",
            f"    first re-plan after the fresh plan (one withdrawal), whole Workspace.solve "
            f"{first_t:.3f}s ({first_t / fresh_t:.3f}x fresh; patched: {after_fresh.patched}); "
            f"its start readied in the background after the fresh plan was shown: {ready_t:.3f}s",
            f"    re-plan after one withdrawal, patched {patched_t:.3f}s "
            f"({patched_t / fresh_t:.3f}x fresh); network built anew {today_t:.3f}s "
            f"({today_t / fresh_t:.3f}x); whole Workspace.solve (install, record) "
            f"{solve_t:.3f}s ({solve_t / fresh_t:.3f}x)",
            f"    what-if preview (one cap raised) {what_if_t:.3f}s "
            f"({what_if_t / fresh_t:.3f}x fresh; patched: {preview.outcome.patched})",
            "    patched re-plan breakdown:",
            *profile_lines,
        ]


def main() -> None:
    """Print the side-by-side times and ratios."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="L")
    parser.add_argument("--families", default="loose,tight,scarce")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--no-conference", action="store_true")
    args = parser.parse_args()
    warm_up()
    for size in args.sizes.split(","):
        for family in args.families.split(","):
            print("\n".join(family_rows(family, size, args.repeats)), flush=True)
    if not args.no_conference:
        print("\n".join(conference_rows(args.repeats)), flush=True)


if __name__ == "__main__":
    main()
