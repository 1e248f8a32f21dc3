"""Speed and peak memory of the score recipe's text and topic parts on the largest venue.

    python benchmarks/text_scores.py                       # 20,000 papers x 15,000 reviewers
    python benchmarks/text_scores.py --papers 2000 --reviewers 1500
    python benchmarks/text_scores.py --write-results       # also update benchmarks/RESULTS.md

Invented texts: each paper has a title and an abstract of about 150 words, each reviewer a
profile of about 300 words, drawn from 60 topics of 300 words each plus 3,000 common words
(Zipf-like), so that the cosines have the structure of a real venue. Every step runs in a fresh
child process, which resets its peak memory (`/proc/self/clear_refs`) after the session is
built, so a step's peak is its own plus the session it works on:

- ours: `plan.recipe.recipe_scores` with the default recipe (TF-IDF fit, blocked sparse
  products, the best 150 reviewers per paper, Jaccard topics, the combined table);
- reference: scikit-learn's plain full product of the same TF-IDF rows
  (`sklearn.metrics.pairwise.linear_kernel`, the cosine of unit rows) and numpy's
  `argpartition` for the best 150 per paper, skipped with `--no-reference` (it needs
  papers x reviewers x 8 bytes at once: 2.4 GB at the largest size, more in between).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np
from results_md import write_section

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))

SECTION = "## Scores from text and topics (`python benchmarks/text_scores.py`)"

_LETTERS = np.array(list("abcdefghijklmnopqrstuvwxyz"))


def _words(rng: np.random.Generator, count: int) -> list[str]:
    seen: set[str] = set()
    out: list[str] = []
    while len(out) < count:
        word = "".join(rng.choice(_LETTERS, size=int(rng.integers(4, 10))))
        if word not in seen:
            seen.add(word)
            out.append(word)
    return out


def make_session(papers: int, reviewers: int, seed: int = 5) -> Any:
    """An invented venue with titles, abstracts, profiles, topics and keywords."""
    from review_alloc.model import Paper, Reviewer, Session

    rng = np.random.default_rng(seed)
    n_topics = 60
    common = _words(rng, 3000)
    special = _words(rng, n_topics * 300)
    topic_words = [special[k * 300 : (k + 1) * 300] for k in range(n_topics)]
    zipf = 1.0 / np.arange(1, 3001)
    zipf /= zipf.sum()

    common_array = np.array(common)
    topic_array = np.array(topic_words)

    def text(topics: list[int], length: int) -> str:
        own = int(length * 0.6)
        which = np.array(topics)[np.arange(own) % len(topics)]
        parts = [
            *common_array[rng.choice(3000, size=length - own, p=zipf)],
            *topic_array[which, rng.integers(0, 300, size=own)],
        ]
        return " ".join(parts)

    def topics_of() -> list[int]:
        return [int(t) for t in rng.choice(n_topics, size=int(rng.integers(1, 4)), replace=False)]

    paper_list = []
    for i in range(papers):
        own = topics_of()
        paper_list.append(
            Paper(
                id=f"P{i:05d}",
                title=text(own, 10),
                abstract=text(own, 150),
                topics=[f"topic {t}" for t in own],
                keywords=[str(rng.choice(topic_words[own[0]]))],
            )
        )
    reviewer_list = []
    for j in range(reviewers):
        own = topics_of()
        reviewer_list.append(
            Reviewer(
                id=f"R{j:05d}",
                profile=text(own, 300),
                topics=[f"topic {t}" for t in own],
                keywords=[str(rng.choice(topic_words[own[-1]]))],
            )
        )
    return Session(name="text-bench", papers=paper_list, reviewers=reviewer_list)


def _peak_reset() -> None:
    # Writing 5 resets the peak resident size this process reports (VmHWM), Linux >= 4.0.
    with open("/proc/self/clear_refs", "w") as f:
        f.write("5")


def _peak_gib() -> float:
    with open("/proc/self/status") as f:
        kib = next(int(line.split()[1]) for line in f if line.startswith("VmHWM:"))
    return kib / 2**20


def child(step: str, papers: int, reviewers: int, top: int) -> dict[str, Any]:
    """Run one step on a freshly built session (in this process) and measure it."""
    from review_alloc.model import ScoreRecipe, Signals
    from review_alloc.plan.recipe import recipe_scores
    from review_alloc.plan.similarity import tfidf_rows

    session = make_session(papers, reviewers)
    result: dict[str, Any] = {"step": step}
    if step == "ours":
        # Warm the imports (scikit-learn, scipy) outside the timed part.
        recipe_scores(session.model_copy(update={"papers": session.papers[:2]}), ScoreRecipe(),
                      Signals())
        _peak_reset()
        start, cpu = time.perf_counter(), time.process_time()
        table = recipe_scores(session, ScoreRecipe(top=top), Signals())
        result["seconds"] = time.perf_counter() - start
        result["cpu_seconds"] = time.process_time() - cpu
        result["rows"] = len(table)
    else:
        from sklearn.metrics.pairwise import linear_kernel

        from review_alloc.plan.similarity import paper_text, reviewer_text

        docs_p = [paper_text(session, i) for i in range(papers)]
        docs_r = [reviewer_text(session, j) for j in range(reviewers)]
        _peak_reset()
        start, cpu = time.perf_counter(), time.process_time()
        p, r = tfidf_rows(docs_p, docs_r)
        fitted = time.perf_counter()
        full = linear_kernel(p, r, dense_output=True)
        best = np.argpartition(full, reviewers - top, axis=1)[:, reviewers - top :]
        result["seconds"] = time.perf_counter() - start
        result["cpu_seconds"] = time.process_time() - cpu
        result["fit_seconds"] = fitted - start
        result["rows"] = int(best.size)
    result["peak_gib"] = _peak_gib()
    return result


def run_step(step: str, papers: int, reviewers: int, top: int) -> dict[str, Any]:
    """One step in a fresh process (its own peak memory)."""
    code = (
        f"import json, sys; sys.path.insert(0, {str(HERE)!r}); import text_scores as t; "
        f"print(json.dumps(t.child({step!r}, {papers}, {reviewers}, {top})))"
    )
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, env=env, check=False
    )
    if done.returncode != 0:
        return {"step": step, "error": done.stderr.strip().splitlines()[-1:]}
    return json.loads(done.stdout.strip().splitlines()[-1])


def section(papers: int, reviewers: int, top: int, results: list[dict[str, Any]]) -> str:
    """The RESULTS.md section for this run."""
    import sklearn

    lines = [
        SECTION,
        "",
        f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {os.cpu_count()} CPUs; "
        f"Python {platform.python_version()}, numpy {np.__version__}, scikit-learn "
        f"{sklearn.__version__}. {papers:,} papers x {reviewers:,} reviewers, best {top} "
        "reviewers per paper; invented texts (abstracts ~160 words, profiles ~300 words). "
        "Each step in a fresh process; peak = its resident high-water mark, session included; "
        "CPU seconds are the process's own (all its threads), which a busy machine inflates "
        "less than the wall-clock seconds.",
        "",
        "| step | seconds | CPU seconds | peak memory (GiB) | pairs kept |",
        "| --- | ---: | ---: | ---: | ---: |",
    ]
    names = {
        "ours": "ours: `recipe_scores` (TF-IDF, blocked sparse top-N, Jaccard, combined)",
        "reference": "scikit-learn full product (`linear_kernel`) + argpartition, text only",
    }
    for r in results:
        if "error" in r:
            lines.append(f"| {names[r['step']]} | failed: {' '.join(r['error'])} | | | |")
            continue
        lines.append(
            f"| {names[r['step']]} | {r['seconds']:.1f} | {r['cpu_seconds']:.1f} | "
            f"{r['peak_gib']:.2f} | {r['rows']:,} |"
        )
    return "\n".join(lines) + "\n"



def main() -> None:
    """Run both steps, print the table, and write it into RESULTS.md when asked."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--papers", type=int, default=20_000)
    parser.add_argument("--reviewers", type=int, default=15_000)
    parser.add_argument("--top", type=int, default=150)
    parser.add_argument("--no-reference", action="store_true")
    parser.add_argument("--write-results", action="store_true")
    args = parser.parse_args()
    steps = ["ours"] + ([] if args.no_reference else ["reference"])
    results = []
    for step in steps:
        print(f"running {step} ...", flush=True)
        results.append(run_step(step, args.papers, args.reviewers, args.top))
        print(json.dumps(results[-1]), flush=True)
    text = section(args.papers, args.reviewers, args.top, results)
    print(text)
    if args.write_results:
        write_section(SECTION, text.removeprefix(SECTION))


if __name__ == "__main__":
    main()
