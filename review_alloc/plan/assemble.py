"""A Plan from chosen pairs, leads picked and figures counted (randomised and fair plans).

The plain planner's decoded flow (`plan.solve`) and the plans that are not one min-cost flow
(a draw, the fairest plan) are all assembled here, then handed to the independent checker.
"""

from __future__ import annotations

from datetime import datetime

import numpy as np

from review_alloc.model import Plan, Session
from review_alloc.model.plans import trusted_assignments, trusted_plan
from review_alloc.plan.figures import plan_figures
from review_alloc.plan.leads import LeadChoice, LeadState, lead_choice, lead_mask_warm


def assemble_plan(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    score: np.ndarray,
    now: datetime,
    method: str,
    warm_leads: LeadState | None = None,
) -> tuple[Plan, LeadChoice | None, LeadState | None]:
    """The unchecked plan of the given pairs (session positions), leads chosen when asked for
    (warm-started from `warm_leads`), and the lead state a later plan can start from."""
    order = np.lexsort((reviewer, paper))
    reviewer, paper, score = reviewer[order], paper[order], score[order]
    lead = np.zeros(len(paper), dtype=bool)
    leads = None
    state = None
    if session.policy.max_leads > 0:
        lead, state = lead_mask_warm(session, reviewer, paper, score, warm_leads)
        leads = lead_choice(session, reviewer, paper, lead)
    paper_ids = [p.id for p in session.papers]
    reviewer_ids = [r.id for r in session.reviewers]
    assignments = trusted_assignments(
        [paper_ids[i] for i in paper.tolist()],
        [reviewer_ids[j] for j in reviewer.tolist()],
        score.tolist(),
        lead.tolist(),
    )
    figures = plan_figures(session, reviewer, paper, score)
    return trusted_plan(assignments, figures, now, method), leads, state
