"""Max-statistic collectors: one maximum per table row, one successive-maxima count per point.

The null shards never keep the permutation maps: `MaxStatCollector` keeps
one maximum per table row (single-step max-statistic), `StepDownCollector`
one successive-maxima count per point (Westfall-Young step-down); the
inference on them is `famwise.correct.maxstat`, which ranks points with the
same `rank_order` and tail transform (`transformed_observed`).

Tails: ``"two-sided"`` works on |stat|, ``"greater"`` on stat, ``"less"`` on
-stat.

``family: all-contrasts``: feed one collector the statistic blocks of all
contrasts concatenated along the point axis (for the step-down, built on the
observed statistics concatenated in the same contrast order).
"""

import numpy as np

from famwise.errors import UserError
from famwise.kernels.row_maxima import _largest_magnitude_bits, _successive_max_counts
from famwise.stats import TAILS

_TAIL_CODES = {"two-sided": 0, "greater": 1, "less": 2}


class MaxStatCollector:
    """Keep, per permutation-table row, the maximum of the tail-transformed statistic.

    Parameters
    ----------
    tail : {"two-sided", "greater", "less"}
        Maximum of |stat|, stat or -stat.
    key : str, optional
        Prefix of the stored array name. Default ``"maxstat"``.
    """

    def __init__(self, *, tail, key="maxstat"):
        check_tail(tail)
        self.tail = tail
        self.key = key
        self._maxima = []

    def update(self, stats):
        """Take the statistic maps of consecutive table rows.

        Parameters
        ----------
        stats : ndarray of float, shape (n_rows_in_block, n_points)
        """
        stats = _check_block(stats, None)
        if self.tail == "two-sided" and stats.dtype == np.float32 and stats.flags.c_contiguous:
            top = np.empty(stats.shape[0], dtype=np.int32)
            _largest_magnitude_bits(stats.view(np.int32), top)
            block_max = top.view(np.float32)
        elif self.tail == "greater":
            block_max = stats.max(axis=1)
        elif self.tail == "less":
            block_max = -stats.min(axis=1)
        else:
            block_max = np.maximum(stats.max(axis=1), -stats.min(axis=1))
        self._maxima.append(block_max.astype(np.float64))

    def arrays(self):
        """``{"<key>.max": float64 (n_rows,)}``, rows in table order."""
        maxima = np.concatenate(self._maxima) if self._maxima else np.empty(0)
        return {f"{self.key}.max": maxima}


class StepDownCollector:
    """Count, per point, the permutations whose successive maximum reaches the point.

    Points are ranked by their observed tail-transformed statistic, most
    significant first; tied points keep their flat (C) order (a stable sort).
    For each table row the successive maximum u_j is the largest
    tail-transformed statistic over the points of rank j and below (the less
    significant ones); the count of point j goes up by one when
    u_j >= observed_j. The maps are never stored: each block is gathered in
    rank order and reduced with one running maximum per row (a serial numba
    kernel; shards give the parallelism).

    Parameters
    ----------
    observed_stat : ndarray of float, any shape (P points)
        The observed statistic (finite). For ``family: all-contrasts`` pass
        the flattened statistics of all contrasts concatenated, and give
        :meth:`update` the blocks concatenated the same way.
    tail : {"two-sided", "greater", "less"}
    key : str, optional
        Prefix of the stored array name. Default ``"stepdown"``.

    Notes
    -----
    Counts add across shards (the ``.count`` suffix), so any split of the
    table rows gives the same total.

    References
    ----------
    Westfall PH, Young SS (1993). Resampling-Based Multiple Testing.
    Wiley (successive maxima).
    """

    def __init__(self, observed_stat, *, tail, key="stepdown"):
        observed = transformed_observed(observed_stat, tail)
        self.tail = tail
        self.key = key
        self.n_points = observed.size
        # Least significant point first: the running maximum grows along the row.
        self._rising = np.ascontiguousarray(rank_order(observed)[::-1])
        self._observed_rising = observed[self._rising]
        self._count_rising = np.zeros(self.n_points, dtype=np.int64)

    def update(self, stats):
        """Take the statistic maps of consecutive table rows.

        Parameters
        ----------
        stats : ndarray of float, shape (n_rows_in_block, n_points)
            Computed exactly as ``observed_stat`` was, so that the identity
            row reproduces it bit for bit (otherwise the identity may fail
            to count and a p can fall below 1 / n_rows). NaN values never
            raise the running maximum.
        """
        stats = _check_block(stats, self.n_points)
        if stats.dtype not in (np.float32, np.float64):
            stats = stats.astype(np.float64)
        # float32 blocks stay float32: a float64 copy of a 64 x 288,000 block costs more than the scan.
        _successive_max_counts(
            np.ascontiguousarray(stats), self._rising, self._observed_rising, _TAIL_CODES[self.tail], self._count_rising
        )

    def arrays(self):
        """``{"<key>.count": int64 (n_points,)}``, per point in flat point order."""
        counts = np.empty(self.n_points, dtype=np.int64)
        counts[self._rising] = self._count_rising
        return {f"{self.key}.count": counts}


def rank_order(transformed):
    """Point indices from most to least significant; ties keep flat order (stable)."""
    return np.argsort(-transformed, kind="stable")


def transformed_observed(observed_stat, tail):
    """Flat float64 tail-transformed observed statistic; checks tail and finiteness."""
    check_tail(tail)
    observed = np.asarray(observed_stat, dtype=np.float64).ravel()
    if observed.size == 0:
        raise UserError("max-statistic: expected at least one point to test, got an empty family")
    n_bad = int(np.count_nonzero(~np.isfinite(observed)))
    if n_bad:
        raise UserError(
            f"max-statistic: the observed statistic must be finite at every tested point; "
            f"found {n_bad} NaN/inf of {observed.size} points"
        )
    if tail == "two-sided":
        return np.abs(observed)
    return -observed if tail == "less" else observed


def check_tail(tail):
    """Raise UserError unless ``tail`` is one of ``TAILS``."""
    if tail not in TAILS:
        raise UserError(f"tail must be one of {', '.join(TAILS)}; got {tail!r}")


def _check_block(stats, n_points):
    """A collector block as a 2-D array with the expected number of points."""
    stats = np.asarray(stats)
    if stats.ndim != 2 or (n_points is not None and stats.shape[1] != n_points):
        expected = "(n_rows, n_points)" if n_points is None else f"(n_rows, {n_points})"
        raise ValueError(f"statistic block must have shape {expected}; got {stats.shape}")
    return stats
