"""The null of cluster inference: the largest cluster statistic of every permutation.

Clusters, tails and the cluster statistic are those of
`famwise.correct.clusters` (the inference on this null), computed by the
same kernel (`famwise.kernels.components`).
"""

import numpy as np

from famwise.kernels.components import _cluster_max_block
from famwise.nulls.collectors.kernel_inputs import (
    DIMS,
    check_cluster_settings,
    check_dims,
    check_graph,
    tail_code,
)
from famwise.nulls.collectors.row_maximum import RowMaximumCollector


class ClusterCollector(RowMaximumCollector):
    """Null collector: the largest cluster statistic of every table row.

    Parameters
    ----------
    threshold : float
        Cluster-forming threshold as a statistic value (>= 0); see the module
        docstring for how tails use it.
    shape : tuple of int
        (n_channels, n_freqs, n_times).
    indptr, indices : ndarray of int
        Channel neighbor graph (CSR, symmetric, no self loops).
    dims : tuple of str
        Dimensions clustering connects over, from ("channel", "freq", "time").
    cluster_stat : {"mass", "size"}
    min_supra_neighbors : int
    tail : {"two-sided", "greater", "less"}
    key : str
        Prefix of the stored arrays.

    Notes
    -----
    ``arrays()`` gives ``{"<key>.max": float64 (n_rows,)}`` in row order; each
    row's value depends on that row alone, so any block split gives the same
    array.
    """

    def __init__(
        self,
        *,
        threshold,
        shape,
        indptr,
        indices,
        dims=DIMS,
        cluster_stat="mass",
        min_supra_neighbors=0,
        tail="two-sided",
        key="cluster",
    ):
        super().__init__()
        check_cluster_settings(threshold, cluster_stat, min_supra_neighbors)
        self._shape, self._indptr, self._indices = check_graph(shape, indptr, indices)
        self._links = check_dims(dims)
        self._tail_code = tail_code(tail)
        self._threshold = float(threshold)
        self._use_mass = cluster_stat == "mass"
        self._min_neighbors = int(min_supra_neighbors)
        self._key = key

    def _new_workspace(self, n_chunks, n_points):
        return (
            np.empty((n_chunks, 2, n_points), np.int8),
            np.empty((n_chunks, 2, n_points), np.int32),
            np.empty((n_chunks, n_points), np.float64),
        )

    def _run_kernel(self, stats, n_chunks, workspace, out):
        _cluster_max_block(
            stats,
            self._threshold,
            self._tail_code,
            *self._shape,
            self._indptr,
            self._indices,
            *self._links,
            self._use_mass,
            self._min_neighbors,
            n_chunks,
            *workspace,
            out,
        )
