"""review-alloc: a terminal planner that assigns reviewers to submissions (exact flow engine)."""

__version__ = "0.1.0"
