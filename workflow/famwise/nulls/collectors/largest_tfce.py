"""The null of TFCE inference: the largest |TFCE| of every permutation.

The enhancement is that of `famwise.correct.tfce.tfce_map` (the inference
on this null), computed by the same kernel (`famwise.kernels.tfce_sweep`).
"""

import numpy as np

from famwise.errors import UserError
from famwise.kernels._jit import thread_count
from famwise.kernels.tfce_sweep import _tfce_max_block, _tfce_workspace
from famwise.nulls.collectors.kernel_inputs import (
    DIMS,
    INFINITE_STATISTIC,
    check_dims,
    check_graph,
    check_tfce_settings,
    statistic_block,
    tail_code,
)


class TFCECollector:
    """Null collector: the largest |TFCE| of every table row.

    Parameters are those of ``tfce_map`` plus ``shape`` (n_channels, n_freqs,
    n_times) and ``key`` (prefix of the stored arrays). ``arrays()`` gives
    ``{"<key>.max": float64 (n_rows,)}`` in row order; each row's value
    depends on that row alone, so any block split gives the same array.
    Rows of a block run in parallel (numba threads); scratch memory is about
    100 bytes per point per thread, allocated at the first block and reused.
    A float32 block gives the same maxima as the same values in float64.
    """

    def __init__(self, *, shape, indptr, indices, dims=DIMS, E=0.5, H=2.0, step=None, tail="two-sided", key="tfce"):
        self._step = check_tfce_settings(E, H, step)
        self._shape, self._indptr, self._indices = check_graph(shape, indptr, indices)
        self._links = check_dims(dims)
        self._tail_code = tail_code(tail)
        self._E, self._H = float(E), float(H)
        self._key = key
        self._parts = []
        self._workspace = None

    def update(self, stats):
        """Take the statistic maps (n_rows_in_block, n_points), float32 or float64, of consecutive table rows."""
        stats = statistic_block(stats, self._shape)
        n_pts = stats.shape[1]
        out = np.empty(stats.shape[0])
        if stats.shape[0]:
            n_chunks = min(stats.shape[0], thread_count())
            if self._workspace is None or len(self._workspace[0]) < n_chunks:  # reused by every block
                self._workspace = _tfce_workspace(n_chunks, n_pts, self._indptr)
            _tfce_max_block(
                stats,
                self._tail_code,
                self._E,
                self._H,
                self._step,
                *self._shape,
                self._indptr,
                self._indices,
                *self._links,
                n_chunks,
                *self._workspace,
                out,
            )
            if np.isinf(out).any():
                raise UserError(INFINITE_STATISTIC)
        self._parts.append(out)

    def arrays(self):
        """``{"<key>.max": float64 (n_rows,)}``."""
        return {f"{self._key}.max": np.concatenate(self._parts) if self._parts else np.empty(0)}
