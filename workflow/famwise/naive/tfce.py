"""Naive TFCE: label the thresholded map at every step of a fixed grid of levels.

Each level's components come from ``scipy.sparse.csgraph.connected_components``
on the supra-level part of the explicit product-neighborhood graph. Used as
the oracle for the fast kernels and as the baseline of ``famwise bench``.

References
----------
Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing
problems of smoothing, threshold dependence and localisation in cluster
inference. NeuroImage 44(1):83-98.
"""

import numpy as np
from scipy.sparse.csgraph import connected_components

from famwise.naive.clusters import one_sample_t, product_adjacency


def tfce_reference(
    stat, *, indptr, indices, dims=("channel", "freq", "time"), E=0.5, H=2.0, step=0.1, tail="two-sided", adjacency=None
):
    """Fixed-step TFCE by labeling at every level k * step, k = 1, 2, ...

    Parameters
    ----------
    stat : ndarray, shape (n_channels, n_freqs, n_times)
        Statistic map.
    indptr, indices : ndarray of int
        Channel neighbor graph in CSR form.
    dims : tuple of str
        Dimensions that clustering connects over.
    E, H : float
        Extent and height exponents.
    step : float
        Level spacing dh; a point's TFCE is sum_k e_k^E (k dh)^H dh over the
        levels k dh <= |stat| (right-endpoint rule).
    tail : {"two-sided", "greater", "less"}
        Which signs are enhanced.
    adjacency : scipy.sparse matrix, optional
        The product graph, when already built with ``product_adjacency``.

    Returns
    -------
    ndarray, shape (n_channels, n_freqs, n_times)
        Signed TFCE map.
    """
    stat = np.asarray(stat, dtype=np.float64)
    if adjacency is None:
        adjacency = product_adjacency(stat.shape, indptr=indptr, indices=indices, dims=dims)
    flat = stat.ravel()
    out = np.zeros(flat.shape)
    signs = {"two-sided": (1, -1), "greater": (1,), "less": (-1,)}[tail]
    for sign in signs:
        values = sign * flat
        k = 1
        while True:
            level = k * step
            selected = np.flatnonzero(values >= level)
            if selected.size == 0:
                break
            sub = adjacency[selected][:, selected]
            _, labels = connected_components(sub, directed=False)
            extent = np.bincount(labels)[labels].astype(np.float64)
            out[selected] += sign * extent**E * level**H * step
            k += 1
    return out.reshape(stat.shape)


def tfce_null_reference(
    data, flips, *, indptr, indices, dims=("channel", "freq", "time"), E=0.5, H=2.0, step=0.1, tail="two-sided"
):
    """max |TFCE| of the one-sample t map of every sign-flip row, recomputed from the data.

    Parameters
    ----------
    data : ndarray, shape (n_subjects, n_channels, n_freqs, n_times)
        Per-subject maps.
    flips : ndarray, shape (n_rows, n_subjects)
        +1 / -1 sign of each subject in each row.

    Returns
    -------
    ndarray, shape (n_rows,)
    """
    adjacency = product_adjacency(data.shape[1:], indptr=indptr, indices=indices, dims=dims)
    out = np.empty(len(flips))
    for row, signs in enumerate(flips):
        stat = one_sample_t(data * signs[:, None, None, None])
        out[row] = np.abs(
            tfce_reference(stat, indptr=indptr, indices=indices, E=E, H=H, step=step, tail=tail, adjacency=adjacency)
        ).max()
    return out
