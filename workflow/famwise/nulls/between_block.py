"""Fast path of the permutation engine for the between-groups F (three or more groups).

The grand-mean-centred data y and their total sum of squares do not change
when labels are permuted, so each row needs only its group sums S_g, summed
over subjects in subject order (`famwise.kernels.between_f`; the last group
takes the total minus the others). Then
SS_between = sum_g S_g^2 / n_g, the groups taken in the order of their first
member: rows that only swap whole groups of equal size list the same groups,
with the same members, in the same order, and give the identity's F bit for
bit (`famwise.nulls.multigroup.n_relabellings`).
"""

import numpy as np

from famwise.kernels.between_f import _between_f

_TILE = 1024  # points per tile: the k group sums of a tile stay in cache


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
    total, ss_total = np.zeros(n_points), np.zeros(n_points)
    for row in centred:
        total += row
        ss_total += row * row
    df_ratio = (n - float(k)) / (k - 1.0)

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], n_points), dtype=np.float32)
        position, group_sizes = group_order(groups[rows], k, sizes)
        _between_f(position, 1.0 / group_sizes, centred, total, ss_total, df_ratio, _TILE, out)
        return out

    return block


def group_order(labels: np.ndarray, k: int, sizes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row's groups in the order of their first member.

    Parameters
    ----------
    labels : ndarray of int, shape (b, n)
        Each subject's group in each row.
    k : int
    sizes : ndarray of float, shape (k,)

    Returns
    -------
    position : ndarray of int64, shape (b, n)
        The place of subject i's group in row r's order.
    group_sizes : ndarray of float64, shape (b, k)
        The size of the group in each place.
    """
    first = np.argmax(labels[:, None, :] == np.arange(k)[None, :, None], axis=2)  # (b, k)
    order = np.argsort(first, axis=1)
    place = np.argsort(order, axis=1)  # place of each group label
    return np.ascontiguousarray(np.take_along_axis(place, labels, axis=1)), np.ascontiguousarray(sizes[order])
