"""Naive cluster inference: t recomputed per permutation, components from scipy.sparse.csgraph.

The product neighborhood is built as an explicit sparse adjacency over all
(channel, frequency, time) points, and each sign's supra-threshold part is
labeled with ``scipy.sparse.csgraph.connected_components``. Used as the
oracle for the fast kernels and as the baseline of ``famwise bench``.

References
----------
Maris E, Oostenveld R (2007). Nonparametric statistical testing of EEG- and
MEG-data. J Neurosci Methods 164(1):177-190.
"""

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components


def one_sample_t(data):
    """One-sample t over axis 0 (ddof 1), shape data.shape[1:]."""
    n = data.shape[0]
    return data.mean(axis=0) / (data.std(axis=0, ddof=1) / np.sqrt(n))


def _path_graph(n):
    """Adjacency of a path of n nodes (neighbors i, i+1)."""
    return sp.diags([np.ones(n - 1), np.ones(n - 1)], [-1, 1], shape=(n, n), format="csr")


def product_adjacency(shape, *, indptr, indices, dims=("channel", "freq", "time")):
    """Explicit adjacency of the product neighborhood over all points.

    Parameters
    ----------
    shape : tuple of int
        (n_channels, n_freqs, n_times).
    indptr, indices : ndarray of int
        Channel neighbor graph in CSR form.
    dims : tuple of str
        Dimensions that are linked.

    Returns
    -------
    scipy.sparse.csr_matrix, shape (n_points, n_points)
        Points in C order of ``shape``.
    """
    n_ch, n_f, n_t = shape
    channel = sp.csr_matrix((np.ones(len(indices)), indices, indptr), shape=(n_ch, n_ch))
    eye_c, eye_f, eye_t = sp.identity(n_ch), sp.identity(n_f), sp.identity(n_t)
    parts = []
    if "channel" in dims:
        parts.append(sp.kron(sp.kron(channel, eye_f), eye_t))
    if "freq" in dims:
        parts.append(sp.kron(sp.kron(eye_c, _path_graph(n_f)), eye_t))
    if "time" in dims:
        parts.append(sp.kron(sp.kron(eye_c, eye_f), _path_graph(n_t)))
    n_pts = n_ch * n_f * n_t
    total = sum(parts, sp.csr_matrix((n_pts, n_pts)))
    return sp.csr_matrix(total)


def _selected_signs(stat, threshold, tail, indptr, indices, min_supra_neighbors):
    """Per sign, the boolean map of points that may join clusters."""
    n_ch = stat.shape[0]
    channel = sp.csr_matrix((np.ones(len(indices)), indices, indptr), shape=(n_ch, n_ch))
    signs = {"two-sided": (1, -1), "greater": (1,), "less": (-1,)}[tail]
    out = {}
    for sign in signs:
        supra = sign * stat > threshold
        if min_supra_neighbors > 0:
            count = (channel @ supra.reshape(n_ch, -1).astype(float)).reshape(stat.shape)
            supra = supra & (count >= min_supra_neighbors)
        out[sign] = supra
    return out


def cluster_labels_reference(
    stat,
    *,
    threshold,
    indptr,
    indices,
    dims=("channel", "freq", "time"),
    cluster_stat="mass",
    min_supra_neighbors=0,
    tail="two-sided",
    adjacency=None,
):
    """Clusters of one map.

    Returns
    -------
    list of (sign, point_indices, statistic)
        One entry per cluster; point indices into the C-order flattened map.
    """
    stat = np.asarray(stat, dtype=np.float64)
    if adjacency is None:
        adjacency = product_adjacency(stat.shape, indptr=indptr, indices=indices, dims=dims)
    clusters = []
    for sign, supra in _selected_signs(stat, threshold, tail, indptr, indices, min_supra_neighbors).items():
        selected = np.flatnonzero(supra.ravel())
        if selected.size == 0:
            continue
        _, labels = connected_components(adjacency[selected][:, selected], directed=False)
        for label in range(labels.max() + 1):
            points = selected[labels == label]
            value = np.abs(stat.ravel()[points]).sum() if cluster_stat == "mass" else float(points.size)
            clusters.append((sign, points, value))
    return clusters


def cluster_null_reference(
    data,
    flips,
    *,
    threshold,
    indptr,
    indices,
    dims=("channel", "freq", "time"),
    cluster_stat="mass",
    min_supra_neighbors=0,
    tail="two-sided",
):
    """Largest cluster statistic of the one-sample t map of every sign-flip row.

    Parameters
    ----------
    data : ndarray, shape (n_subjects, n_channels, n_freqs, n_times)
        Per-subject maps.
    flips : ndarray, shape (n_rows, n_subjects)
        +1 / -1 sign of each subject in each row.

    Returns
    -------
    ndarray, shape (n_rows,)
        0 for a row without clusters.
    """
    adjacency = product_adjacency(data.shape[1:], indptr=indptr, indices=indices, dims=dims)
    out = np.zeros(len(flips))
    for row, signs in enumerate(flips):
        stat = one_sample_t(data * signs[:, None, None, None])
        clusters = cluster_labels_reference(
            stat,
            threshold=threshold,
            indptr=indptr,
            indices=indices,
            cluster_stat=cluster_stat,
            min_supra_neighbors=min_supra_neighbors,
            tail=tail,
            adjacency=adjacency,
        )
        out[row] = max((value for _, _, value in clusters), default=0.0)
    return out
