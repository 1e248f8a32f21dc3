"""The import dialog offers what `review-alloc import` offers besides the files: a bids file, a
sheet, an encoding, the default figures, the chair rules, unscored pairs, a name; the session
it builds is the one the command line builds from the same options."""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

from textual.widgets import Button, Input, Static

from review_alloc.cli import main
from review_alloc.model import load_session
from review_alloc.tui import ReviewAllocApp
from review_alloc.tui.dialogs import ImportForm
from review_alloc.tui.importopts import ImportOptionsForm, read_options

Factory = Callable[..., ReviewAllocApp]
SAMPLE = Path(__file__).resolve().parents[2] / "sample_sessions" / "workshop-csv"

OPTIONS = {
    "bids": str(SAMPLE / "bids.csv"),
    "cap": "4",
    "floor": "1",
    "unscored": "exclude",
    "senior_min": "1",
    "max_per_institution": "1",
    "require_shared_topic": "yes",
    "bottleneck": "no",
    "max_leads": "2",
    "name": "Spring workshop",
}
CLI_OPTIONS = [
    "--bids", str(SAMPLE / "bids.csv"), "--cap", "4", "--floor", "1", "--unscored", "exclude",
    "--senior-min", "1", "--max-per-institution", "1", "--require-shared-topic",
    "--no-bottleneck", "--max-leads", "2", "--name", "Spring workshop",
]  # fmt: skip


def _fill(form: ImportForm, target: Path) -> None:
    for kind in ("papers", "reviewers", "conflicts", "scores"):
        form.query_one(f"#field-{kind}", Input).value = str(SAMPLE / f"{kind}.csv")
    form.query_one("#field-target", Input).value = str(target)


async def test_options_reach_the_session_as_on_the_command_line(
    new_app: Factory, tmp_path: Path
) -> None:
    target = tmp_path / "app.json"
    app = new_app()
    async with app.run_test(size=(100, 40)) as pilot:
        await pilot.press("i")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ImportForm)
        _fill(form, target)
        said = str(form.query_one("#options-said", Static).render())
        assert "the defaults" in said and "ctrl+t" in said

        await pilot.press("ctrl+t")
        await pilot.pause()
        options = app.screen
        assert isinstance(options, ImportOptionsForm)
        # A word where a number belongs and a figure the policy refuses stay in the form.
        options.query_one("#field-cap", Input).value = "many"
        options.query_one("#field-reviews", Input).value = "0"
        options.query_one("#field-senior_hard", Input).value = "perhaps"
        options.query_one("#ok", Button).press()
        await pilot.pause()
        problems = str(options.query_one(".problems", Static).render())
        assert "'many' is not a whole number" in problems
        assert "'perhaps' is not yes or no" in problems
        assert app.screen is options
        options.query_one("#field-senior_hard", Input).value = ""
        options.query_one("#field-cap", Input).value = "4"
        options.query_one("#ok", Button).press()
        await pilot.pause()
        problems = str(options.query_one(".problems", Static).render())
        assert "reviews per paper: Input should be greater" in problems
        options.query_one("#field-reviews", Input).value = ""
        for name, value in OPTIONS.items():
            options.query_one(f"#field-{name}", Input).value = value
        options.query_one("#ok", Button).press()
        await pilot.pause()
        assert app.screen is form
        said = str(form.query_one("#options-said", Static).render())
        assert "cap 4" in said and "unscored exclude" in said and "bids bids.csv" in said

        # Reopened, the form shows what was typed.
        await pilot.press("ctrl+t")
        await pilot.pause()
        assert app.screen.query_one("#field-cap", Input).value == "4"
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen is form
        form.query_one("#field-target", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert not isinstance(app.screen, ImportForm), str(form.query_one(".problems").render())

    cli_target = tmp_path / "cli.json"
    files = [f"--{k}={SAMPLE / f'{k}.csv'}" for k in ("papers", "reviewers", "conflicts", "scores")]
    assert main(["import", *files, *CLI_OPTIONS, "-o", str(cli_target)]) == 0
    ours, theirs = load_session(target), load_session(cli_target)
    assert ours.name == theirs.name == "Spring workshop"
    assert ours.policy == theirs.policy
    assert ours.policy.cap == 4 and ours.policy.unscored == "exclude"
    assert ours.policy.max_per_institution == 1 and ours.policy.require_shared_topic
    assert ours.signals is not None and theirs.signals is not None
    assert json.dumps(ours.signals.model_dump(mode="json"), sort_keys=True) == json.dumps(
        theirs.signals.model_dump(mode="json"), sort_keys=True
    )
    assert len(ours.scores) == len(theirs.scores)


def test_off_and_zero_mean_no_limit_and_empty_means_the_default() -> None:
    options, problems = read_options(
        {"max_per_institution": "0", "min_score": "off", "cap": "", "balance": "default"}
    )
    assert problems == [] and options is not None
    assert options.policy == {"max_per_institution": None, "min_score": None}
    assert options.make_policy().cap == 6  # the command line's default (--help)
    options, problems = read_options({"sheet": "Sheet2", "encoding": "cp1252", "floor": "-1"})
    assert options is None and problems == ["floor: -1 is negative"]
