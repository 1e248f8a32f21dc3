"""The cautions every face shows (CLI, TUI, JSON reports), written once so they say the same."""

from __future__ import annotations

PLAN_CAUTION = (
    "A plan is advice to the chair, who follows the venue's conflict-of-interest policy: "
    "check every pair before any assignment goes out."
)
"""Shown beside every plan."""

RAISE_CAP_CAUTION = (
    "Raising a cap asks more of a person: agree every raise with the reviewer before relying "
    "on it, and prefer recruiting when the raises are large."
)
"""Shown beside a suggested cap raise."""

CONFLICT_CAUTION = (
    "Conflicts of interest are never overridden by this tool: the conflicts listed here are "
    "information for the chair, not a suggested fix, and no fix lifts them."
)
"""Shown beside what conflicts and blocks cost."""

FIX_CAUTIONS = (RAISE_CAP_CAUTION, CONFLICT_CAUTION)
"""The cautions of an explanation's fixes, in the order shown."""

RANDOM_CAUTION = (
    "A randomised plan gives up some expected score so that no reviewer can count on getting "
    "any one paper: compare its scores with the plain plan's before choosing it, and keep the "
    "seed and probabilities with the record so the draw can be repeated for anyone who asks."
)
"""Shown beside a randomised plan, with its score next to the plain plan's."""

FAIR_CAUTION = (
    "The fairest plan lifts the worst-off papers at the cost of some total score: compare its "
    "scores with the plain plan's before choosing it."
)
"""Shown beside the fairest plan, with its scores next to the plain plan's."""
