"""Left-out points and non-finite permutation values, set aside before the collectors see a block.

The convention (see the package docstring): a left-out point's statistic is
0 in every row; an included point whose statistic is not finite in a row
(it became degenerate only after permutation) is more extreme than any
observed value, so it becomes +inf on the tail's scale (+inf, or -inf for the
``less`` tail). The collectors then count it as an exceedance and make the
row's maximum +inf.
"""

import numpy as np


class BlockScreen:
    """Applied in place to each block of statistic maps before any collector.

    Parameters
    ----------
    left_out : ndarray of bool, shape (P,)
        The points the observed stage left out (``observed.npz`` ``left_out``).
    tail : {"two-sided", "greater", "less"}
        The effective tail.
    """

    def __init__(self, left_out, *, tail):
        self._left_out = np.asarray(left_out, dtype=bool).reshape(-1)
        self._any_left_out = bool(self._left_out.any())
        self._extreme = -np.inf if tail == "less" else np.inf

    def __call__(self, stats: np.ndarray) -> np.ndarray:
        """The block (b, P) with left-out points 0 and non-finite values on the extreme side (same array)."""
        if self._any_left_out:
            stats[:, self._left_out] = 0
        if not np.isfinite(stats).all():
            stats[~np.isfinite(stats)] = self._extreme
        return stats


def infinite_rows(stats: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Rows of a screened block holding an infinite value, and the block with them zeroed for a kernel.

    Returns
    -------
    stats : ndarray (b, P)
        ``stats`` itself when every value is finite, else a copy with each
        infinite value set to 0 (the cluster and TFCE kernels need finite
        values; those rows' maxima are +inf regardless).
    rows : ndarray of bool (b,) or None
        None when every value is finite.
    """
    finite = np.isfinite(stats)
    if finite.all():
        return stats, None
    return np.where(finite, stats, 0).astype(stats.dtype), ~finite.all(axis=1)
