"""`benchmarks/run.py --write-results` replaces only its generated blocks in RESULTS.md."""

from __future__ import annotations

from benchmarks.run import marker, merge_results


def framed(name: str, body: str) -> str:
    """A block as `merge_results` frames it."""
    return f"{marker(name, 'begin')}\n{body}{marker(name, 'end')}"


def test_generated_blocks_are_replaced_and_hand_written_text_kept() -> None:
    old = (
        "# Benchmark results\n\nIntro written by hand.\n\n"
        + framed("main", "| old main table |\n")
        + "\n\n## Targets\n\nHand-written verdicts.\n\n## Orders\n\nWhy it is slow.\n\n"
        + framed("orders", "| old orders table |\n")
        + "\n\nMore notes.\n"
    )
    new = merge_results(old, {"orders": "| new orders table |\n"})
    assert "| new orders table |" in new and "| old orders table |" not in new
    # The block this run did not measure, and every hand-written line, stay as they were.
    assert "| old main table |" in new
    for line in ("Intro written by hand.", "Hand-written verdicts.", "Why it is slow.",
                 "More notes."):
        assert line in new
    assert new.replace("| new orders table |", "| old orders table |") == old
    both = merge_results(new, {"main": "| new main |\n", "orders": "| newer |\n"})
    assert both.index("| new main |") < both.index("## Targets") < both.index("| newer |")
    assert both.count(marker("main", "begin")) == 1 == both.count(marker("orders", "end"))


def test_a_block_without_markers_is_added_at_the_end() -> None:
    old = "# Benchmark results\n\nOnly hand-written text.\n"
    new = merge_results(old, {"orders": "| table |\n"})
    assert new.startswith(old.rstrip("\n"))
    assert new.endswith(framed("orders", "| table |\n") + "\n")
    # Writing again replaces the block it added instead of adding a second one.
    again = merge_results(new, {"orders": "| table 2 |\n"})
    assert again.count(marker("orders", "begin")) == 1 and "| table 2 |" in again
