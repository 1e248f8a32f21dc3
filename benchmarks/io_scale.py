"""Import, save, load, plan and reopen (the stored plan re-checked) at the largest venue size.

Run `python benchmarks/io_scale.py` (about a minute; `--papers/--reviewers/--candidates` to
resize). Each step runs in a fresh subprocess so that its peak resident memory is its own.
The instance is invented: topic-driven candidate lists with seeded random scores.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def write_csvs(folder: Path, papers: int, reviewers: int, candidates: int, seed: int) -> None:
    """Write papers, reviewers and scores CSV files of the given size."""
    rng = np.random.default_rng(seed)
    topics = [f"topic {k:02d}" for k in range(60)]
    with (folder / "papers.csv").open("w", encoding="utf-8") as out:
        out.write("paper_id,title,topics\n")
        for i in range(papers):
            out.write(f"P{i:06d},Paper {i},{topics[i % 60]}\n")
    with (folder / "reviewers.csv").open("w", encoding="utf-8") as out:
        out.write("reviewer_id,name,email,institution,topics,cap\n")
        for j in range(reviewers):
            out.write(
                f"R{j:06d},Reviewer {j},r{j}@inst{j % 900}.example,Institute {j % 900},"
                f"{topics[j % 60]},{int(rng.integers(4, 9))}\n"
            )
    with (folder / "scores.csv").open("w", encoding="utf-8") as out:
        out.write("reviewer_id,paper_id,score\n")
        for i in range(papers):
            chosen = rng.choice(reviewers, size=candidates, replace=False)
            values = np.round(rng.uniform(0, 1, size=candidates), 3)
            out.write(
                "".join(f"R{j:06d},P{i:06d},{v}\n" for j, v in zip(chosen, values, strict=True))
            )


STEPS = {
    "import": (
        "from review_alloc.io import import_csv\n"
        "from review_alloc.model import Policy, save_session\n"
        "s = import_csv(F/'papers.csv', F/'reviewers.csv', None, F/'scores.csv',"
        " policy=Policy(unscored='exclude'), name='scale')\n"
        "save_session(s, F/'s.json')\n"
    ),
    "load+save": (
        "from review_alloc.model import load_session, save_session\n"
        "t0 = time.perf_counter(); s = load_session(F/'s.json'); t1 = time.perf_counter()\n"
        "save_session(s, F/'s2.json'); t2 = time.perf_counter()\n"
        "extra = {'load_s': t1 - t0, 'save_s': t2 - t1}\n"
    ),
    "plan": (
        "from review_alloc.model import load_session\n"
        "from review_alloc.plan import make_plan\n"
        "s = load_session(F/'s.json')\n"
        "t0 = time.perf_counter(); o = make_plan(s); t1 = time.perf_counter()\n"
        "extra = {'solve_s': t1 - t0, 'coverage': o.plan.figures.coverage,"
        " 'demand': o.plan.figures.demand}\n"
        "from review_alloc.model import save_session\n"
        "save_session(s.model_copy(update={'plan': o.plan}), F/'planned.json')\n"
    ),
    "open": (
        "from review_alloc.model import load_session\n"
        "from review_alloc.workspace import Workspace\n"
        "t0 = time.perf_counter(); s = load_session(F/'planned.json'); t1 = time.perf_counter()\n"
        "ws = Workspace(s); ws._recheck_stored_plan(); t2 = time.perf_counter()\n"
        "extra = {'load_s': t1 - t0, 'recheck_s': t2 - t1, 'problems': len(ws.plan_problems)}\n"
    ),
}


def run_step(name: str, folder: Path) -> dict[str, float]:
    """Run one step in a subprocess; return its wall time, peak memory and extra figures."""
    code = (
        "import json, resource, sys, time\nfrom pathlib import Path\n"
        f"F = Path({str(folder)!r})\nextra = {{}}\nstart = time.perf_counter()\n"
        + STEPS[name]
        + "print(json.dumps({'seconds': time.perf_counter() - start,"
        " 'peak_mib': resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, **extra}))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True
    )
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    """Build the instance, run each step, print a table and the JSON."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--papers", type=int, default=20_000)
    parser.add_argument("--reviewers", type=int, default=15_000)
    parser.add_argument("--candidates", type=int, default=150)
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        started = time.perf_counter()
        write_csvs(folder, args.papers, args.reviewers, args.candidates, args.seed)
        print(
            f"instance written in {time.perf_counter() - started:.1f} s: {args.papers} papers, "
            f"{args.reviewers} reviewers, {args.papers * args.candidates:,} scores"
        )
        results = {name: run_step(name, folder) for name in STEPS}
        results["file_mib"] = (folder / "s.json").stat().st_size / 2**20
    for name in STEPS:
        row = results[name]
        extra = ", ".join(
            f"{k} {v:.2f}" if isinstance(v, float) else f"{k} {v}"
            for k, v in row.items()
            if k not in ("seconds", "peak_mib")
        )
        print(f"{name:10s} {row['seconds']:7.2f} s   peak {row['peak_mib']:7.0f} MiB   {extra}")
    print(f"session file {results['file_mib']:.1f} MiB")
    print(json.dumps(results))


if __name__ == "__main__":
    main()
