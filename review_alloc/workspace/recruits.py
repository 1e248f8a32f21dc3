"""Recruits become people: a placeholder reviewer that an accepted recruit fix added is replaced
by the real person the chair found, as one recorded change."""

from __future__ import annotations

from review_alloc.workspace.base import ChangeRefused, redoable
from review_alloc.workspace.changes import ChangesMixin


class RecruitsMixin(ChangesMixin):
    """Naming the recruit placeholders of accepted fixes."""

    def recruit_placeholders(self) -> list[str]:
        """Ids of the reviewers that are still recruit placeholders, in session order."""
        from review_alloc.plan.whatif import is_recruit_placeholder

        return [r.id for r in self.session.reviewers if is_recruit_placeholder(r)]

    @redoable
    def name_recruit(
        self,
        placeholder_id: str,
        new_id: str,
        name: str,
        *,
        email: str = "",
        institution: str = "",
        reason: str = "",
    ) -> None:
        """Replace a recruit placeholder by the real person, as one recorded change.

        The person keeps the placeholder's place, topics, cap and scores; every pair, pin,
        block and conflict of the placeholder becomes theirs. Their institution and e-mail may
        bring conflicts with them: such pairs leave the plan at once, as after any change.
        """
        from review_alloc.plan.whatif import is_recruit_placeholder

        j = self._reviewer(placeholder_id)
        old = self.session.reviewers[j]
        if not is_recruit_placeholder(old):
            raise ChangeRefused(
                [f"reviewer {placeholder_id} is a person already, not a recruit placeholder"]
            )
        new_id, name = new_id.strip(), name.strip()
        problems = []
        if not new_id:
            problems.append("id: required")
        elif new_id != placeholder_id and new_id in self.session.reviewer_index():
            problems.append(f"id {new_id}: another reviewer has it already")
        if not name:
            problems.append("name: required")
        if problems:
            raise ChangeRefused(problems)
        reviewers = self._with_reviewer(
            j, id=new_id, name=name, email=email.strip(), institution=institution.strip()
        )
        s = self.session

        def moved(rows: list) -> list:
            """The rows with the placeholder's id replaced (new objects only where it changed)."""
            return [
                r.model_copy(update={"reviewer": new_id}) if r.reviewer == placeholder_id else r
                for r in rows
            ]

        fields: dict[str, object] = {
            "reviewers": reviewers,
            "conflicts": moved(s.conflicts),
            "pins": moved(s.pins),
            "blocks": moved(s.blocks),
        }
        if s.plan is not None:
            fields["plan"] = s.plan.model_copy(update={"assignments": moved(s.plan.assignments)})
        known = ", ".join(x for x in (email.strip(), institution.strip()) if x)
        detail = f"recruit {placeholder_id} ({old.name}) is now {new_id} {name}" + (
            f" ({known})" if known else ""
        )
        self._apply("set-reviewer", new_id, detail, reason, **fields)
