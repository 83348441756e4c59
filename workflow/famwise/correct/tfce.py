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

import numpy as np

from famwise.correct.clusters import check_alpha, count_at_least, critical_value
from famwise.correct.result import CorrectionResult
from famwise.errors import UserError
from famwise.kernels.tfce_sweep import _tfce_map, _tfce_workspace
from famwise.nulls.collectors.kernel_inputs import (
    DIMS,
    INFINITE_STATISTIC,
    check_dims,
    check_graph,
    check_tfce_settings,
    tail_code,
)


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
    step_code = check_tfce_settings(E, H, step)
    stat = np.ascontiguousarray(stat, dtype=np.float64)
    shape, indptr, indices = check_graph(stat.shape, indptr, indices)
    if np.isinf(stat).any():
        raise UserError(INFINITE_STATISTIC)
    out = np.empty(stat.size)
    _tfce_map(
        stat.ravel(),
        tail_code(tail),
        float(E),
        float(H),
        step_code,
        *shape,
        indptr,
        indices,
        *check_dims(dims),
        *_tfce_workspace(1, stat.size, indptr),
        out,
    )
    return out.reshape(stat.shape)


def tfce_inference(
    observed_stat, null_max, *, indptr, indices, dims=DIMS, E=0.5, H=2.0, step=None, tail="two-sided", alpha=0.05
):
    """TFCE permutation inference on the merged null.

    Parameters
    ----------
    observed_stat : ndarray, shape (n_channels, n_freqs, n_times)
        Observed statistic map.
    null_max : ndarray, shape (n_rows,)
        Largest |TFCE| of every permutation-table row (row 0 = identity).
    indptr, indices, dims, E, H, step, tail
        As given to ``famwise.nulls.collectors.largest_tfce.TFCECollector``.
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
        method="tfce",
        p_corrected=p_map,
        mask=p_map <= alpha,
        threshold=critical_value(null_max, alpha),
        threshold_kind="tfce",
        maps={"tfce": enhanced},
        null=null_max,
        settings={
            "dims": list(dims),
            "E": float(E),
            "H": float(H),
            "step": step,
            "tail": tail,
            "alpha": float(alpha),
            "n_rows": int(null_max.size),
        },
    )
