"""Upper bounds on the numbers a session holds, so that nothing downstream overflows.

The planner turns counts and scores into 64-bit integer capacities and costs; a cap of 10**20
or a score of 1e308 would overflow there. The bounds are far above any real venue's needs and
are checked at import (file, line, column) and at load (field path).
"""

from __future__ import annotations

MAX_COUNT = 10_000
"""Most for any count a chair sets: reviews and required reviews per paper, seniors wanted,
caps, floors and overload allowances per reviewer, leads, reviewers per institution. No venue
needs more than a few hundred."""

MAX_SCORE = 1_000_000.0
"""Highest score a pair may have (scores are finite and >= 0)."""
