"""Exceptions of the planning layer."""

from __future__ import annotations

from review_alloc.model import InputError


class PlanInputError(InputError):
    """The session cannot be planned as it stands (a refused pin, a score range too wide)."""


class PlanCheckError(RuntimeError):
    """The independent checker found a plan that breaks a rule; never shown as a valid plan."""

    def __init__(self, problems: list[str]) -> None:
        super().__init__("plan check failed:\n" + "\n".join(problems))
        self.problems = problems
