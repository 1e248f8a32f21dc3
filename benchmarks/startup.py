"""Start-up of the small commands and the first plan on a new machine (issue 22, items 3 and 4).

    python benchmarks/startup.py                  # both parts, printed
    python benchmarks/startup.py --write-results  # also update benchmarks/RESULTS.md

Small commands: `--help`, `history`, `diff` and `export` on a copy of the demo workshop, each
as a fresh process, side by side (round-robin) with `python -c "import numpy, pydantic"`;
the median of `--repeats` runs and the ratio command / baseline (target <= 2x). Every process
runs with bytecode caching on (`PYTHONDONTWRITEBYTECODE` is dropped), as installed packages do.

First plan: `review-alloc plan` on a fresh copy of the demo workshop with NUMBA_CACHE_DIR
pointing at a new empty folder each run (target <= 2 s from asking to the plan printed). Before
the next run the benchmark waits for the background compile that run started, so runs do not
slow each other; it reports how long that compile took and a plan on the filled cache.
"""

from __future__ import annotations

import argparse
import os
import platform
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import UTC, datetime
from pathlib import Path

from results_md import write_section

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
WORKSHOP = ROOT / "sample_sessions" / "workshop.json"
SECTION = "## Start-up and the first plan (`python benchmarks/startup.py`)"
BASELINE = "import numpy, pydantic"
COMMANDS: dict[str, list[str]] = {
    "--help": ["--help"],
    "history": ["history", "{session}"],
    "diff": ["diff", "{session}", "1", "2"],
    "export": ["export", "{session}", "--to", "{folder}/out.csv", "--force"],
}


def _env(cache: Path | None = None) -> dict[str, str]:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(
        p for p in (str(ROOT), os.environ.get("PYTHONPATH")) if p))
    # Our modules run from cached bytecode, as an installed package's do and as numpy's and
    # pydantic's do in the baseline: with PYTHONDONTWRITEBYTECODE set, every run would compile
    # the package from source again (a third of a second more here).
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    if cache is not None:
        env["NUMBA_CACHE_DIR"] = str(cache)
    return env


def _cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def _run(argv: list[str], env: dict[str, str], cwd: Path) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one fresh process (which must succeed)."""
    start, cpu = time.perf_counter(), _cpu()
    subprocess.run(argv, env=env, cwd=cwd, check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
    return time.perf_counter() - start, _cpu() - cpu


def _timed(argv: list[str], env: dict[str, str], cwd: Path) -> float:
    """Wall-clock seconds of one fresh process (which must succeed)."""
    return _run(argv, env, cwd)[0]


def small_commands(repeats: int, folder: Path) -> dict[str, tuple[float, float]]:
    """Median wall-clock and CPU seconds of the baseline and each small command, round-robin.

    CPU seconds are the process's own, so a machine busy with other work shifts them less.
    """
    session = folder / "startup.json"
    shutil.copy(WORKSHOP, session)
    env = _env()
    # Two revisions, so that history, diff and export have something to show.
    for fresh in ([], ["--fresh"]):
        subprocess.run([sys.executable, "-m", "review_alloc", "plan", str(session), *fresh],
                       env=env, cwd=folder, check=True, capture_output=True)
    runs: dict[str, list[tuple[float, float]]] = {"baseline": [], **{n: [] for n in COMMANDS}}
    argvs = {"baseline": [sys.executable, "-c", BASELINE]}
    for name, args in COMMANDS.items():
        filled = [a.format(session=session, folder=folder) for a in args]
        argvs[name] = [sys.executable, "-m", "review_alloc", *filled]
    for argv in argvs.values():
        _timed(argv, env, folder)  # bytecode written and files in the page cache
    for _ in range(repeats):
        for name, argv in argvs.items():
            runs[name].append(_run(argv, env, folder))
    return {
        name: (statistics.median(t[0] for t in times), statistics.median(t[1] for t in times))
        for name, times in runs.items()
    }


def _ready(cache: Path) -> bool:
    return any(cache.glob("review-alloc-ready-*"))


def first_plans(repeats: int, folder: Path) -> list[dict[str, float]]:
    """Per run: the first plan's seconds on an empty cache, the background compile, a warm plan."""
    results = []
    for run in range(repeats):
        cache = folder / f"empty-cache-{run}"
        session = folder / f"first-{run}.json"
        shutil.copy(WORKSHOP, session)
        argv = [sys.executable, "-m", "review_alloc", "plan", str(session)]
        start = time.perf_counter()
        first = _timed(argv, _env(cache), folder)
        while not _ready(cache) and time.perf_counter() - start < 600:
            time.sleep(0.2)
        compiled = time.perf_counter() - start
        warm = _timed(argv, _env(cache), folder)
        results.append({"first": first, "compile": compiled, "warm": warm})
        print(f"  run {run + 1}: first plan {first:.2f} s, background compile done after "
              f"{compiled:.1f} s, plan on the filled cache {warm:.2f} s", flush=True)
    return results


def section(small: dict[str, tuple[float, float]], plans: list[dict[str, float]]) -> str:
    """The RESULTS.md section for this run."""
    base, base_cpu = small["baseline"]
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    lines = [
        SECTION,
        "",
        f"{datetime.now(UTC):%Y-%m-%d %H:%M} UTC; {os.cpu_count()} CPUs; Python "
        f"{platform.python_version()}; load average {load:.1f} when it ended. Each figure is "
        "a fresh process; small commands are the median of round-robin runs.",
        "",
        "| command | seconds | ratio (target <= 2x) | CPU seconds | CPU ratio |",
        "| --- | ---: | ---: | ---: | ---: |",
        f"| baseline `python -c \"{BASELINE}\"` | {base:.3f} | 1.00 | {base_cpu:.3f} | 1.00 |",
    ]
    for name in COMMANDS:
        wall, cpu = small[name]
        lines.append(f"| `review-alloc {name}` | {wall:.3f} | {wall / base:.2f} | {cpu:.3f} | "
                     f"{cpu / base_cpu:.2f} |")
    firsts = [p["first"] for p in plans]
    lines += [
        "",
        "First plan of the demo workshop on an empty kernel cache (target <= 2 s):",
        "",
        "| run | first plan (s) | background compile done after (s) | plan on the filled "
        "cache (s) |",
        "| ---: | ---: | ---: | ---: |",
    ]
    for i, p in enumerate(plans, 1):
        lines.append(f"| {i} | {p['first']:.2f} | {p['compile']:.1f} | {p['warm']:.2f} |")
    if firsts:
        lines += ["", f"Median first plan {statistics.median(firsts):.2f} s "
                  f"(range {min(firsts):.2f}-{max(firsts):.2f})."]
    lines += ["", "Targets in this run:", ""]
    for name in COMMANDS:
        wall, cpu = small[name]
        verdict = "met" if wall / base <= 2 else "not met"
        lines.append(f"- `{name}` <= 2x the baseline: **{verdict}** ({wall / base:.2f}x "
                     f"wall-clock, {cpu / base_cpu:.2f}x CPU)")
    if firsts:
        first = statistics.median(firsts)
        verdict = "met" if first <= 2 else "not met"
        lines.append(f"- the demo workshop's first plan on an empty cache <= 2 s: **{verdict}** "
                     f"(median {first:.2f} s)")
    return "\n".join(lines) + "\n"



def main() -> None:
    """Time both parts, print them, and write them into RESULTS.md when asked."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7, help="runs of each small command")
    parser.add_argument("--plans", type=int, default=3, help="first plans, each on a new cache")
    parser.add_argument("--write-results", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="review-alloc-startup-") as name:
        folder = Path(name)
        print("small commands ...", flush=True)
        small = small_commands(args.repeats, folder)
        print("first plans on empty caches ...", flush=True)
        plans = first_plans(args.plans, folder)
    text = section(small, plans)
    print(text)
    if args.write_results:
        write_section(SECTION, text.removeprefix(SECTION))


if __name__ == "__main__":
    main()
