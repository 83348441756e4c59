"""Per-point exceedance counts: the null of the permutation p-values.

``permutation_p = count / n_rows`` with the identity row counted in both, as
`famwise.nulls.tables` explains; ties follow the convention of
`famwise.nulls`.
"""

import numpy as np

from famwise.nulls.tables import check_tail


def _oriented(stats: np.ndarray, tail: str) -> np.ndarray:
    if tail == "two-sided":
        return np.abs(stats)
    return -stats if tail == "less" else stats


class ExceedanceCollector:
    """Per-point counts of rows whose statistic reaches the observed one.

    Counts #{rows: stat* >= obs} on |stat| (two-sided), stat (greater) or
    -stat (less), the identity row included. Values within a relative
    100 machine epsilons (of the null's dtype) of the observed one count as
    ties, as in ``scipy.stats.permutation_test``, so that the float32 null
    matches the float64 observed statistic. A point whose observed statistic
    is NaN (no variance) counts every row (permutation p = 1).

    Parameters
    ----------
    observed_stat : ndarray, shape (P,)
        `famwise.stats.GroupStatistic.stat`.
    tail : {"two-sided", "greater", "less"}
        Use `GroupStatistic.effective_tail` (``"greater"`` for F).
    key : str
        Prefix of the stored array: ``<key>.count``, int64 (P,).
    """

    def __init__(self, observed_stat, *, tail, key="exceed"):
        check_tail(tail)
        self._observed = _oriented(np.asarray(observed_stat, dtype=np.float64), tail)
        self._tail = tail
        self._key = key
        self._count = np.zeros(self._observed.shape, dtype=np.int64)

    def update(self, stats: np.ndarray) -> None:
        """Count the rows of a block (b, P) that reach the observed statistic."""
        eps = 100 * np.finfo(stats.dtype).eps
        bar = (self._observed - np.abs(self._observed) * eps).astype(stats.dtype)
        reach = _oriented(stats, self._tail) >= bar
        reach |= np.isnan(bar)
        self._count += np.count_nonzero(reach, axis=0)

    def arrays(self) -> dict[str, np.ndarray]:
        """``{"<key>.count": int64 (P,)}``."""
        return {f"{self._key}.count": self._count.copy()}


def permutation_p(counts, n_rows: int) -> np.ndarray:
    """Permutation p = counts / n_rows, identity row included in counts and n_rows.

    Exact tables: #{null >= observed} / n_total. Monte Carlo tables with m
    random rows: (1 + b) / (1 + m) (Phipson & Smyth 2010), never 0.
    """
    counts = np.asarray(counts)
    if n_rows < 1:
        raise ValueError(f"n_rows must be at least 1, got {n_rows}")
    if (counts < 0).any() or (counts > n_rows).any():
        raise ValueError(f"exceedance counts must lie between 0 and n_rows ({n_rows})")
    return counts / float(n_rows)
