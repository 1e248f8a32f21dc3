"""The smallest changes that close the gaps, computed exactly on the max-coverage network.

Three kinds, one module each: raised caps (`caps`), recruits per topic (`recruits`), and the
conflicts and blocks that keep reviews away (`losses`, information only: no fix lifts a
conflict of interest). `targets` computes the first two for both targets (every paper at its
minimum, every paper fully reviewed) with their cost in people and caps. `plan.explanation`
puts them together with the shortfall groups.
"""

from review_alloc.plan.fixes.caps import CapRaise, CapRaiseFix, raise_caps_fix
from review_alloc.plan.fixes.common import Unclosable
from review_alloc.plan.fixes.losses import PairLoss, pair_losses
from review_alloc.plan.fixes.recruits import RecruitFix, RecruitNeed, recruit_fix
from review_alloc.plan.fixes.targets import (
    FIX_KEYS,
    TARGET_TIERS,
    FixMenu,
    TargetFix,
    fix_menu,
    target_fixes,
)

__all__ = [
    "FIX_KEYS",
    "TARGET_TIERS",
    "FixMenu",
    "TargetFix",
    "fix_menu",
    "target_fixes",
    "CapRaise",
    "CapRaiseFix",
    "PairLoss",
    "RecruitFix",
    "RecruitNeed",
    "Unclosable",
    "pair_losses",
    "raise_caps_fix",
    "recruit_fix",
]
