"""What the kinds of fix share: papers a fix cannot close, and the reviews a coverage flow gives."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from review_alloc.plan.explain import CoverageNetwork


@dataclass(frozen=True)
class Unclosable:
    """A paper that a kind of fix cannot bring to its reviews, and why."""

    paper: str
    missing: int
    reason: str


def paper_inflow(cov: CoverageNetwork) -> np.ndarray:
    """Reviews each paper gets in the coverage network's maximum flow (its pair arcs only)."""
    net = cov.plan_net
    inflow = np.bincount(net.pair_paper, weights=cov.flow[cov.pair_arcs], minlength=net.n_papers)
    return inflow.astype(np.int64)
