"""The import dialog maps another system's column names to our fields: it lists each file's
header, the chair picks our field per column, and the session keeps the mapping for the next
import."""

from __future__ import annotations

import csv
from collections.abc import Callable
from pathlib import Path

from textual.widgets import Button, Input, Label, Select, Static

from review_alloc.model import load_session
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import ColumnsForm, ImportForm

Factory = Callable[..., ReviewAllocApp]
REPO = Path(__file__).resolve().parents[2]
SAMPLE = REPO / "sample_sessions" / "workshop-csv"
HEADER = "Submission ID,Paper Title,Keywords,reviews,min_reviews,authors,institutions"


def _their_papers(folder: Path) -> Path:
    # Their system keeps no abstracts or keywords: the sample's columns up to institutions.
    with (SAMPLE / "papers.csv").open(encoding="utf-8", newline="") as handle:
        rows = [row[:7] for row in csv.reader(handle)][1:]
    path = folder / "submissions.csv"
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(HEADER.split(","))
        writer.writerows(rows)
    return path


async def test_the_chair_maps_columns_in_the_import_dialog(
    new_app: Factory, tmp_path: Path
) -> None:
    papers = _their_papers(tmp_path)
    target = tmp_path / "mapped.json"
    app = new_app()
    async with app.run_test(size=(100, 40)) as pilot:
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ImportForm)
        form.query_one("#field-papers", Input).value = str(papers)
        form.query_one("#field-reviewers", Input).value = str(SAMPLE / "reviewers.csv")
        form.query_one("#field-target", Input).value = str(target)
        await pilot.click("#ok")
        await pilot.pause()
        assert "unknown column 'submission id'" in str(form.query_one(".problems").render())

        await pilot.press("ctrl+o")
        await pilot.pause()
        columns = app.screen
        assert isinstance(columns, ColumnsForm)
        labels = [str(label.render()) for label in columns.query(Label)]
        assert labels[:3] == ["Submission ID", "Paper Title", "Keywords"]
        assert "reviewer_id" in labels
        # Columns named as ours start on our field; the others on "not one of ours".
        assert columns.query_one("#map-papers-3", Select).value == "reviews"
        assert columns.query_one("#map-reviewers-0", Select).value == "reviewer_id"
        assert not isinstance(columns.query_one("#map-papers-0", Select).value, str)
        columns.query_one("#map-papers-0", Select).value = "paper_id"
        columns.query_one("#map-papers-1", Select).value = "reviews"
        # The OK button lies below the last file's columns: the chair tabs or scrolls to it.
        columns.query_one("#ok", Button).press()
        await pilot.pause()
        assert "reviews is chosen for both" in str(columns.query_one(".problems").render())
        columns.query_one("#map-papers-1", Select).value = "title"
        columns.query_one("#map-papers-2", Select).value = "topics"
        columns.query_one("#ok", Button).press()
        await pilot.pause()

        assert app.screen is form
        said = str(form.query_one("#columns-said", Static).render())
        assert "papers.paper_id from 'Submission ID'" in said
        form.query_one("#field-target", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, ImportForm), str(form.query_one(".problems").render())
        mapping = {"paper_id": "Submission ID", "title": "Paper Title", "topics": "Keywords"}
        assert load_session(target).import_columns == {"papers": mapping}
        assert len(app.workspace.session.papers) == 40

        # The next import starts from the open session's mapping: nothing to map again.
        await pilot.press("i")
        await pilot.pause()
        again = app.screen
        assert isinstance(again, ImportForm) and again.columns == {"papers": mapping}
        assert "Paper Title" in str(again.query_one("#columns-said", Static).render())


async def test_the_bids_file_chosen_among_the_options_maps_its_columns_too(
    new_app: Factory, tmp_path: Path
) -> None:
    # Another system names the bid column "Preference": the Columns form lists the bids file
    # (chosen in the Options form) beside the others, and the import reads it mapped.
    bids = tmp_path / "prefs.csv"
    text = (SAMPLE / "bids.csv").read_text(encoding="utf-8")
    bids.write_text(text.replace("reviewer_id,paper_id,bid", "reviewer_id,paper_id,Preference", 1))
    target = tmp_path / "with-bids.json"
    app = new_app()
    async with app.run_test(size=(100, 40)) as pilot:
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ImportForm)
        form.query_one("#field-papers", Input).value = str(SAMPLE / "papers.csv")
        form.query_one("#field-reviewers", Input).value = str(SAMPLE / "reviewers.csv")
        form.query_one("#field-target", Input).value = str(target)
        form.options = type(form.options)(bids=bids)
        await pilot.press("ctrl+o")
        await pilot.pause()
        columns = app.screen
        assert isinstance(columns, ColumnsForm)
        assert "bids file" in [str(s.render()) for s in columns.query(Static)]
        assert columns.query_one("#map-bids-0", Select).value == "reviewer_id"
        assert not isinstance(columns.query_one("#map-bids-2", Select).value, str)
        columns.query_one("#map-bids-2", Select).value = "bid"
        columns.query_one("#ok", Button).press()
        await pilot.pause()
        assert app.screen is form
        assert "bids.bid from 'Preference'" in str(form.query_one("#columns-said", Static).render())
        form.query_one("#field-target", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, ImportForm), str(form.query_one(".problems").render())
        session = load_session(target)
        assert session.import_columns == {"bids": {"bid": "Preference"}}
        assert session.signals is not None and session.signals.bids
