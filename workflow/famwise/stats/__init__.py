"""Group test statistics per point: t, Welch t, Yuen's trimmed t, F and r.

`compute` gives the observed statistic with its parametric p and effect size;
`famwise.nulls.engine` gives the same statistics for blocks of permuted data
sets (the fast paths of the permutation engine).
"""

from famwise.stats.group import (
    F_TESTS,
    SIGN_FLIP_TESTS,
    STATISTICS,
    TAILS,
    TESTS,
    GroupStatistic,
    check_design,
    compute,
    forming_threshold,
)

__all__ = [
    "STATISTICS",
    "TAILS",
    "TESTS",
    "F_TESTS",
    "SIGN_FLIP_TESTS",
    "GroupStatistic",
    "check_design",
    "compute",
    "forming_threshold",
]
