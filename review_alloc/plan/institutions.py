"""The institution rule in the network: reviewers' institutions and the crowded groups.

A (paper, institution) group with more candidates than `max_per_institution` gets a node that
caps its flow; where the paper also has a senior node and the group mixes seniors and juniors,
the group is split into a senior part and a junior part (see `institution_groups`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from review_alloc.model import Session
from review_alloc.plan.conflicts import normalise_institution


def reviewer_institutions(session: Session) -> tuple[np.ndarray, list[str]]:
    """(institution id per reviewer, -1 when none given; the normalised institution names)."""
    names: dict[str, int] = {}
    ids = np.full(len(session.reviewers), -1, dtype=np.int64)
    for j, r in enumerate(session.reviewers):
        key = normalise_institution(r.institution)
        if key:
            ids[j] = names.setdefault(key, len(names))
    return ids, list(names)


@dataclass(frozen=True)
class GroupParts:
    """Parts of crowded (paper, institution) groups: a whole group, or its senior or junior part.

    Only parts with more candidates than their cap get a node in the network.
    """

    pair_part: np.ndarray
    """Per pair: its part, or -1 outside crowded groups."""
    paper: np.ndarray
    senior: np.ndarray
    """1 senior part, 0 junior part, -1 whole group."""
    institution: tuple[str, ...]
    cap: np.ndarray
    relaxed: tuple[int, ...]
    """Parts of mixed groups capped at m each (no split fixed): a relaxation."""


def institution_groups(
    session: Session,
    reviewer: np.ndarray,
    paper: np.ndarray,
    pair_senior: np.ndarray,
    has_senior_node: np.ndarray,
    split: Mapping[tuple[int, str], int] | None,
) -> GroupParts:
    """The (paper, institution) groups with more candidates than the cap allows, as parts.

    Where a paper has a senior node
    and a group mixes seniors and juniors, the group is split into a senior part (routed through
    the senior node) and a junior part; `split[(paper, institution)] = k` caps the seniors at k
    and the juniors at m - k (a restriction); without it each part is capped at m (a relaxation).
    """
    m = session.policy.max_per_institution
    empty = np.zeros(0, np.int64)
    none = np.full(len(paper), -1, dtype=np.int64)
    if m is None or len(paper) == 0:
        return GroupParts(none, empty, empty, (), empty, ())
    inst, names = reviewer_institutions(session)
    n_inst = max(len(names), 1)
    g_inst = inst[reviewer]
    member = g_inst >= 0
    gkey = np.where(member, paper * n_inst + g_inst, -1)
    uniq, inverse, counts = np.unique(gkey, return_inverse=True, return_counts=True)
    big = (uniq >= 0) & (counts > m)
    in_big = big[inverse]
    senior = pair_senior >= 0
    # Mixed: the group's paper has a senior node and the group holds both seniors and juniors.
    any_senior = np.bincount(inverse, weights=senior, minlength=len(uniq)) > 0
    any_junior = np.bincount(inverse, weights=~senior, minlength=len(uniq)) > 0
    mixed = big & any_senior & any_junior & has_senior_node[np.maximum(uniq, 0) // n_inst]
    part = np.where(mixed[inverse], senior.astype(np.int64), -1)
    sub_key = np.where(in_big, inverse * 3 + (part + 1), -1)
    sub_uniq, sub_inverse = np.unique(sub_key, return_inverse=True)
    valid = sub_uniq >= 0
    node_of_sub = np.cumsum(valid) - 1
    pair_group = np.where(in_big, node_of_sub[sub_inverse], -1).astype(np.int64)
    groups = sub_uniq[valid]
    g_part = groups % 3 - 1
    g_parent = uniq[groups // 3]
    g_paper = (g_parent // n_inst).astype(np.int64)
    g_name = tuple(names[int(x)] for x in g_parent % n_inst)
    caps = np.full(len(groups), m, dtype=np.int64)
    relaxed: list[int] = []
    for k in np.flatnonzero(g_part >= 0).tolist():
        chosen = None if split is None else split.get((int(g_paper[k]), g_name[k]))
        if chosen is None:
            relaxed.append(k)
        else:
            caps[k] = chosen if g_part[k] == 1 else m - chosen
    return GroupParts(
        pair_part=pair_group,
        paper=g_paper,
        senior=g_part.astype(np.int64),
        institution=g_name,
        cap=caps,
        relaxed=tuple(relaxed),
    )
