"""Fast path of the permutation engine for the between-groups F (three or more groups).

The grand-mean-centred data y and their total sum of squares do not change
when labels are permuted, so each row needs only its group sums S_g
(indicator-weighted sums of y, summed in subject order by
`famwise.kernels.resampled_stats._weighted_sums`); then
SS_between = sum_g S_g^2 / n_g, with the k terms added in ascending order so
that rows which only swap equal-size groups give the identity's F bit for
bit (`famwise.nulls.multigroup.n_relabellings`).
"""

import numpy as np

from famwise.kernels.resampled_stats import _weighted_sums


def between_f_block(x: np.ndarray, groups: np.ndarray):
    """Prepare the data once; return f(rows_block, out=None) -> float32 (b, P) of F.

    Parameters
    ----------
    x : ndarray of float64, shape (n, P)
    groups : ndarray of int, shape (n,), labels 0 .. k - 1

    The returned function takes int rows (b, n): subject i gets the label
    ``groups[row[i]]``.
    """
    n, n_points = x.shape
    groups = np.asarray(groups, dtype=np.int64)
    k = int(groups.max()) + 1
    sizes = np.bincount(groups, minlength=k).astype(np.float64)
    centred = np.ascontiguousarray(x - x.mean(axis=0))
    ss_total = np.zeros(n_points)
    for row in centred:
        ss_total += row * row
    df1, df2 = k - 1.0, n - float(k)
    labels = np.arange(k)

    def block(rows, out=None):
        b = rows.shape[0]
        indicator = (groups[rows][:, None, :] == labels[None, :, None]).astype(np.float64).reshape(b * k, n)
        sums = np.empty((b * k, n_points))
        _weighted_sums(indicator, centred, sums)
        terms = np.sort(sums.reshape(b, k, n_points) ** 2 / sizes[None, :, None], axis=1)
        ss_between = terms[:, 0].copy()
        for g in range(1, k):
            ss_between += terms[:, g]
        ss_within = np.maximum(ss_total - ss_between, 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            f = (ss_between / df1) / (ss_within / df2)
        if out is None:
            return f.astype(np.float32)
        out[...] = f
        return out

    return block
