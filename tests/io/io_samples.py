"""Invented CSV inputs for the import tests (no real people or institutions)."""

from __future__ import annotations

from pathlib import Path

PAPERS = "\n".join(
    [
        "paper_id,title,topics,reviews,min_reviews,authors,institutions",
        "P1,Tidal sensing with drifting buoys,buoys;acoustics,,,ada.quill@northmere.example,"
        "Northmere Institute",
        'P2,"Sediment models, revisited",sediment,2,1,'
        "bram.ostholt@kelreach.example;Lior.Vang@kelreach.example,Kelreach College",
        "P3,Sonar calibration,,4,,,",
        "",
    ]
)

REVIEWERS = """reviewer_id,name,email,institution,topics,cap,floor,senior
R1,Cyra Vellmarsh,Cyra@Wrenholt.example,Wrenholt University,buoys,4,1,yes
R2,Dario Holtkvist,dario@ashmere.example,Ashmere Research Centre,sediment,,,no
R3,Eun Steadlind,,,,2,,
"""

CONFLICTS = """reviewer_id,paper_id,reason
R2,P2,former advisor
R3,P1,
"""

SCORES = """reviewer_id,paper_id,score
R1,P1,0.9
R1,P2,0.25
R2,P2,1
R3,P3,0
"""


def write(folder: Path, name: str, text: str | bytes) -> Path:
    """Write one input file and return its path."""
    path = folder / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, encoding="utf-8", newline="")
    return path


def write_all(folder: Path, **changes: str | bytes) -> dict[str, Path]:
    """The four sample files, any of them replaced by `changes` (keys: papers, reviewers, ...)."""
    texts: dict[str, str | bytes] = {
        "papers": PAPERS,
        "reviewers": REVIEWERS,
        "conflicts": CONFLICTS,
        "scores": SCORES,
    }
    texts.update(changes)
    return {kind: write(folder, f"{kind}.csv", text) for kind, text in texts.items()}


def snapshot(folder: Path) -> dict[str, bytes]:
    """Every file in the folder with its bytes, to show that an import wrote nothing."""
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}
