"""Threshold-free cluster enhancement (TFCE) and its permutation inference.

TFCE(v) = integral from 0 to |stat(v)| of e(h)^E h^H dh, where e(h) is the
number of points in the cluster containing v when the map is thresholded at
h (same sign, product neighborhood as in ``famwise.correct.clusters``).
Positive and negative parts are enhanced separately and keep their sign.
With ``step=None`` the integral is exact (the extent is piecewise constant
between consecutive distinct values); with a step dh it is the
right-endpoint sum over the levels k dh <= |stat|, k = 1, 2, ...:
sum_k e(k dh)^E (k dh)^H dh. The null is the largest |TFCE| of each
permutation; a point's p is the share of permutations (identity included)
whose largest |TFCE| reaches the point's |TFCE|.

References
----------
Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing
problems of smoothing, threshold dependence and localisation in cluster
inference. NeuroImage 44(1):83-98.
"""

import math

import numba
import numpy as np

from famwise.correct.clusters import DIMS, check_alpha, check_dims, check_graph, check_tail, count_at_least, \
    critical_value, statistic_block
from famwise.correct.result import CorrectionResult
from famwise.errors import UserError
from famwise.kernels.tfce import _tfce_map, _tfce_max_block, _tfce_workspace


_INFINITE = ("the statistic map has infinite values (a point with zero variance across subjects?); "
             "TFCE needs finite statistics")


def _check_tfce_settings(E, H, step):
    if not (math.isfinite(E) and E > 0):
        raise UserError(f"TFCE extent exponent E must be a finite number > 0, got {E}")
    if not (math.isfinite(H) and H >= 0):
        raise UserError(f"TFCE height exponent H must be a finite number >= 0, got {H}")
    if step is not None and not (math.isfinite(step) and step > 0):
        raise UserError(f"TFCE step must be a positive statistic value or None (exact), got {step}")
    return -1.0 if step is None else float(step)


def tfce_map(stat, *, indptr, indices, dims=DIMS, E=0.5, H=2.0, step=None, tail="two-sided"):
    """TFCE-enhanced map.

    Parameters
    ----------
    stat : ndarray, shape (n_channels, n_freqs, n_times)
        Statistic map.
    indptr, indices : ndarray of int
        Channel neighbor graph (CSR, symmetric, no self loops).
    dims : tuple of str
        Dimensions the clusters connect over, from ("channel", "freq", "time").
    E, H : float
        Extent and height exponents (Smith & Nichols 2009 recommend 0.5 and 2).
    step : float or None
        None for the exact integral, else the level spacing dh.
    tail : {"two-sided", "greater", "less"}
        Which signs are enhanced (the others give 0).

    Returns
    -------
    ndarray, shape (n_channels, n_freqs, n_times)
        Signed TFCE values.

    References
    ----------
    Smith SM, Nichols TE (2009). NeuroImage 44(1):83-98.
    """
    step_code = _check_tfce_settings(E, H, step)
    stat = np.ascontiguousarray(stat, dtype=np.float64)
    shape, indptr, indices = check_graph(stat.shape, indptr, indices)
    if np.isinf(stat).any():
        raise UserError(_INFINITE)
    out = np.empty(stat.size)
    _tfce_map(stat.ravel(), check_tail(tail), float(E), float(H), step_code, *shape, indptr, indices,
              *check_dims(dims), *_tfce_workspace(1, stat.size, indptr), out)
    return out.reshape(stat.shape)


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

    def __init__(self, *, shape, indptr, indices, dims=DIMS, E=0.5, H=2.0, step=None, tail="two-sided",
                 key="tfce"):
        self._step = _check_tfce_settings(E, H, step)
        self._shape, self._indptr, self._indices = check_graph(shape, indptr, indices)
        self._links = check_dims(dims)
        self._tail_code = check_tail(tail)
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
            n_chunks = min(stats.shape[0], numba.get_num_threads())
            if self._workspace is None or len(self._workspace[0]) < n_chunks:  # reused by every block
                self._workspace = _tfce_workspace(n_chunks, n_pts, self._indptr)
            _tfce_max_block(stats, self._tail_code, self._E, self._H, self._step, *self._shape, self._indptr,
                            self._indices, *self._links, n_chunks, *self._workspace, out)
            if np.isinf(out).any():
                raise UserError(_INFINITE)
        self._parts.append(out)

    def arrays(self):
        """``{"<key>.max": float64 (n_rows,)}``."""
        return {f"{self._key}.max": np.concatenate(self._parts) if self._parts else np.empty(0)}


def tfce_inference(observed_stat, null_max, *, indptr, indices, dims=DIMS, E=0.5, H=2.0, step=None,
                   tail="two-sided", alpha=0.05):
    """TFCE permutation inference on the merged null.

    Parameters
    ----------
    observed_stat : ndarray, shape (n_channels, n_freqs, n_times)
        Observed statistic map.
    null_max : ndarray, shape (n_rows,)
        Largest |TFCE| of every permutation-table row (row 0 = identity).
    indptr, indices, dims, E, H, step, tail
        As given to ``TFCECollector``.
    alpha : float
        Family-wise level.

    Returns
    -------
    CorrectionResult
        ``maps["tfce"]`` the signed TFCE map, ``p_corrected`` per point,
        ``mask`` = p <= alpha, ``threshold`` the critical TFCE value (|TFCE|
        above it is significant), ``null`` = ``null_max``.

    References
    ----------
    Smith SM, Nichols TE (2009). NeuroImage 44(1):83-98.
    """
    check_alpha(alpha)
    null_max = np.asarray(null_max, dtype=np.float64)
    if null_max.ndim != 1 or null_max.size < 1:
        raise ValueError(f"null_max must be a non-empty 1-D array, got shape {null_max.shape}")
    enhanced = tfce_map(observed_stat, indptr=indptr, indices=indices, dims=dims, E=E, H=H, step=step, tail=tail)
    p_map = count_at_least(null_max, np.abs(enhanced).ravel()).reshape(enhanced.shape)
    return CorrectionResult(
        method="tfce", p_corrected=p_map, mask=p_map <= alpha, threshold=critical_value(null_max, alpha),
        threshold_kind="tfce", maps={"tfce": enhanced}, null=null_max,
        settings={"dims": list(dims), "E": float(E), "H": float(H), "step": step, "tail": tail,
                  "alpha": float(alpha), "n_rows": int(null_max.size)})
