"""Rebuild the demo sessions in this folder from their fixed seeds.

Run `python sample_sessions/build.py`.
"""

from __future__ import annotations

from pathlib import Path

from review_alloc.io.session_csv import write_session_csv
from review_alloc.model import save_session
from review_alloc.samples import SAMPLES


def main() -> None:
    """Write every sample session next to this script."""
    here = Path(__file__).resolve().parent
    for stem, make in SAMPLES.items():
        session = make()
        save_session(session, here / f"{stem}.json")
        print(
            f"{stem}.json: {len(session.papers)} papers, {len(session.reviewers)} reviewers, "
            f"{len(session.scores)} scores"
        )
        if stem == "workshop":
            write_session_csv(session, here / "workshop-csv")


if __name__ == "__main__":
    main()
