"""Import of the chair's signals: abstracts, profiles, keywords and the bids file, with the
usual file, line and column errors, and the score recipe applied when signals are present."""

from __future__ import annotations

from pathlib import Path

import pytest
import xlsxwriter

from review_alloc.io import import_csv
from review_alloc.model import MAX_TEXT_CHARS, InputError, bid_part

PAPERS = """paper_id,title,abstract,keywords,topics
P1,Drifting buoys,Tidal sensing with drifting buoys in estuaries,tides;buoys,oceans
P2,Reef sound,Listening to coral reefs with hydrophones,reefs,acoustics
"""
REVIEWERS = """reviewer_id,name,profile,keywords,topics
R1,Cyra Vellmarsh,estuary tides and buoy networks,buoys,oceans
R2,Dario Holtkvist,hydrophones and reef acoustics,reefs,acoustics
"""
SCORES = """reviewer_id,paper_id,score
R1,P2,0.5
"""


def _write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def test_signals_are_read_and_the_recipe_makes_the_scores(tmp_path: Path) -> None:
    bids = _write(tmp_path, "bids.csv", "reviewer_id,paper_id,bid\nR1,P1,Eager\nR2,P1,1.5\n")
    session = import_csv(
        _write(tmp_path, "p.csv", PAPERS),
        _write(tmp_path, "r.csv", REVIEWERS),
        scores=_write(tmp_path, "s.csv", SCORES),
        bids=bids,
    )
    assert session.papers[0].abstract.startswith("Tidal sensing")
    assert session.papers[0].keywords == ["tides", "buoys"]
    assert session.reviewers[1].profile == "hydrophones and reef acoustics"
    assert session.policy.recipe is not None
    assert session.signals is not None
    assert session.signals.expertise.get(0, 1) == 0.5
    assert session.signals.bids.get(0, 0) == 4.0 and session.signals.bids.get(1, 0) == 1.5
    # The given score survives as the expertise part of its pair.
    assert (session.scores.get(0, 1) or 0) >= 0.5
    # R1 fits P1 on text and topic and bid eagerly: the best pair of P1.
    assert (session.scores.get(0, 0) or 0) > (session.scores.get(1, 0) or 0)


def test_scores_alone_are_used_as_given(tmp_path: Path) -> None:
    plain_papers = "paper_id,title\nP1,A\nP2,B\n"
    plain_reviewers = "reviewer_id,name\nR1,Ann\nR2,Bo\n"
    session = import_csv(
        _write(tmp_path, "p.csv", plain_papers),
        _write(tmp_path, "r.csv", plain_reviewers),
        scores=_write(tmp_path, "s.csv", SCORES),
    )
    assert session.policy.recipe is None and session.signals is None
    assert session.scores.get(0, 1) == 0.5 and len(session.scores) == 1


def test_bad_bids_are_named_by_file_line_and_column(tmp_path: Path) -> None:
    bids = _write(
        tmp_path,
        "bids.csv",
        "reviewer_id,paper_id,bid\nR1,P1,keen\nR9,P1,eager\nR2,P7,willing\n"
        "R2,P2,5\nR2,P2,neutral\nR1,P2,\nR1,P1,against\n",
    )
    with pytest.raises(InputError) as caught:
        import_csv(_write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", REVIEWERS),
                   bids=bids)
    lines = caught.value.lines
    name = str(bids)
    assert f"{name}: line 2: column 'bid': 'keen' is not a bid; use one of against (0)" in (
        lines[0]
    )
    assert f"{name}: line 3: column 'reviewer_id': unknown reviewer 'R9'" in lines
    assert f"{name}: line 4: column 'paper_id': unknown paper 'P7'" in lines
    assert any(line.startswith(f"{name}: line 5: column 'bid': '5' is outside") for line in lines)
    assert f"{name}: line 6: duplicate pair (R2, P2), first on line 5" in lines
    assert any(line.startswith(f"{name}: line 7: column 'bid': empty;") for line in lines)
    assert f"{name}: line 8: duplicate pair (R1, P1), first on line 2" in lines


def test_bid_words_any_case_and_decimal_commas(tmp_path: Path) -> None:
    bids = _write(
        tmp_path, "bids.csv", "reviewer_id;paper_id;bid\nR1;P1;RELUCTANT\nR2;P2;3,5\n"
    )
    session = import_csv(
        _write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", REVIEWERS), bids=bids
    )
    assert session.signals is not None
    assert session.signals.bids.get(0, 0) == 1.0 and session.signals.bids.get(1, 1) == 3.5
    assert bid_part(1.0) == -0.5 and bid_part(3.5) == 0.75


def test_bids_from_a_workbook(tmp_path: Path) -> None:
    path = tmp_path / "bids.xlsx"
    book = xlsxwriter.Workbook(str(path))
    sheet = book.add_worksheet("Bids")
    for r, row in enumerate([["reviewer_id", "paper_id", "bid"], ["R2", "P2", "eager"],
                             ["R1", "P2", 0], ["R1", "P1", "maybe"]]):
        for c, value in enumerate(row):
            sheet.write(r, c, value)
    book.close()
    with pytest.raises(InputError) as caught:
        import_csv(_write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", REVIEWERS),
                   bids=path)
    assert caught.value.lines == [
        f"{path}: sheet 'Bids': row 4: column 'bid' (C): 'maybe' is not a bid; use one of "
        "against (0), reluctant (1), neutral (2), willing (3), eager (4), or a number from 0 to 4"
    ]


def test_huge_texts_are_refused_with_their_place(tmp_path: Path) -> None:
    long = "word " * (MAX_TEXT_CHARS // 5 + 10)
    papers = f'paper_id,abstract\nP1,ok\nP2,"{long}"\n'
    with pytest.raises(InputError) as caught:
        import_csv(_write(tmp_path, "p.csv", papers), _write(tmp_path, "r.csv", REVIEWERS))
    assert any(
        line.startswith(f"{tmp_path / 'p.csv'}: line 3: column 'abstract': ")
        and f"at most {MAX_TEXT_CHARS} are kept" in line
        for line in caught.value.lines
    ), caught.value.lines
    huge = "x" * 200_000
    profiles = f'reviewer_id,profile\nR1,"{huge}"\n'
    with pytest.raises(InputError) as caught:
        import_csv(_write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", profiles))
    assert any(
        "a cell holds more than 131,072 characters; an abstract or profile may hold at most"
        in line
        for line in caught.value.lines
    ), caught.value.lines


def test_keywords_refuse_invisible_characters(tmp_path: Path) -> None:
    reviewers = "reviewer_id,keywords\nR1,reefs;so\u200bund\n"
    with pytest.raises(InputError) as caught:
        import_csv(_write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", reviewers))
    assert any("line 2: column 'keywords'" in line for line in caught.value.lines)


def test_the_bids_file_takes_a_column_mapping_like_the_others(tmp_path: Path) -> None:
    from review_alloc.io.columns import column_map, import_fields

    # Another system's bids export: its own names for all three columns.
    theirs = _write(
        tmp_path, "prefs.csv", "Member,Submission,Preference\nR1,P1,Eager\nR2,P1,1.5\n"
    )
    assert import_fields()["bids"] == ("reviewer_id", "paper_id", "bid")
    mapping = column_map(
        ["bids.reviewer_id=Member", "bids.paper_id=submission", "bids.bid=Preference"]
    )
    papers, reviewers = _write(tmp_path, "p.csv", PAPERS), _write(tmp_path, "r.csv", REVIEWERS)
    with pytest.raises(InputError, match="found 'Member', 'Submission', 'Preference'"):
        import_csv(papers, reviewers, bids=theirs)
    session = import_csv(papers, reviewers, bids=theirs, columns=mapping)
    assert session.signals is not None
    assert session.signals.bids.get(0, 0) == 4.0 and session.signals.bids.get(1, 0) == 1.5
    assert session.import_columns["bids"] == {
        "reviewer_id": "Member",
        "paper_id": "submission",
        "bid": "Preference",
    }
    with pytest.raises(InputError, match="bids files have no field 'score'"):
        column_map(["bids.score=Preference"])
