"""The null of TFCE inference: the largest |TFCE| of every permutation.

The enhancement is that of `famwise.correct.tfce.tfce_map` (the inference
on this null), computed by the same kernel (`famwise.kernels.tfce_sweep`).
"""

from famwise.kernels.tfce_sweep import _tfce_max_block, _tfce_workspace
from famwise.nulls.collectors.kernel_inputs import (
    DIMS,
    check_dims,
    check_graph,
    check_tfce_settings,
    tail_code,
)
from famwise.nulls.collectors.row_maximum import RowMaximumCollector


class TFCECollector(RowMaximumCollector):
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
        super().__init__()
        self._step = check_tfce_settings(E, H, step)
        self._shape, self._indptr, self._indices = check_graph(shape, indptr, indices)
        self._links = check_dims(dims)
        self._tail_code = tail_code(tail)
        self._E, self._H = float(E), float(H)
        self._key = key

    def _new_workspace(self, n_chunks, n_points):
        return _tfce_workspace(n_chunks, n_points, self._indptr)

    def _run_kernel(self, stats, n_chunks, workspace, out):
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
            *workspace,
            out,
        )
