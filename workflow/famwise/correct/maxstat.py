"""Max-statistic inference: single step and Westfall-Young step-down.

Both use the permutation null of the study's statistic, gathered by the
collectors of `famwise.nulls.collectors.maxima`: ``MaxStatCollector`` keeps
one maximum per table row, ``StepDownCollector`` one successive-maxima count
per point.
Row 0 of the permutation table is the identity (the observed data), so every
p-value here is ``count / n_rows`` with the identity counted, which is the
exact p under full enumeration and Phipson & Smyth's (1 + b) / (1 + m) under
Monte Carlo.

Tails: ``"two-sided"`` works on |stat|, ``"greater"`` on stat, ``"less"`` on
-stat. Thresholds are reported on that transformed scale.

``family: all-contrasts``: the contrasts share the permutation rows. For the
single step, take the elementwise maximum of the per-contrast max nulls
(:func:`single_step_family`), or feed one ``MaxStatCollector`` the
statistic blocks of all contrasts concatenated along the point axis (the same
thing). For the step-down, feed one ``StepDownCollector``, built on the
concatenated observed statistics, the blocks concatenated along the point axis
in the same contrast order, then call :func:`step_down_family`.
"""

import dataclasses

import numpy as np

from famwise.correct.result import CorrectionResult
from famwise.errors import UserError
from famwise.nulls.collectors.maxima import rank_order, transformed_observed


def single_step(observed_stat, max_null, *, tail, alpha=0.05):
    """Single-step max-statistic correction.

    Parameters
    ----------
    observed_stat : ndarray of float, any shape
        The observed statistic per point (finite).
    max_null : ndarray of float, shape (n_rows,)
        Per-row maximum of the tail-transformed statistic over the family,
        identity row included (``MaxStatCollector``'s ``.max`` array).
    tail : {"two-sided", "greater", "less"}
    alpha : float, optional
        Family-wise error level. Default 0.05.

    Returns
    -------
    CorrectionResult
        ``p_corrected`` = #{max_null >= observed_j} / n_rows (shape of
        ``observed_stat``), ``mask`` = p <= alpha, ``null`` = ``max_null``.
        ``threshold`` (kind ``"stat"``, on the tail-transformed scale) is the
        smallest null maximum a point could reach and still be significant:
        every point at or above it is significant. Points strictly between
        the next lower null maximum and it are significant too (the mask is
        exact); None when no attainable level gives p <= alpha.

    References
    ----------
    Westfall PH, Young SS (1993). Resampling-Based Multiple Testing. Wiley.
    Nichols TE, Holmes AP (2002). Hum Brain Mapp 15:1-25.
    """
    observed = np.asarray(observed_stat, dtype=float)
    transformed = transformed_observed(observed, tail)
    _check_alpha(alpha)
    null = _check_max_null(max_null)
    n_rows = null.size
    sorted_null = np.sort(null)
    p = _exceedance(sorted_null, transformed) / n_rows
    _check_identity_counted(p)
    null_p = _exceedance(sorted_null, sorted_null) / n_rows
    attainable = np.flatnonzero(null_p <= alpha)
    threshold = float(sorted_null[attainable[0]]) if attainable.size else None
    return CorrectionResult(
        method="max-stat",
        p_corrected=p.reshape(observed.shape),
        mask=(p <= alpha).reshape(observed.shape),
        threshold=threshold,
        threshold_kind="stat",
        null=null,
        settings={"alpha": float(alpha), "m": int(transformed.size), "tail": tail, "n_rows": int(n_rows)},
    )


def step_down(observed_stat, counts, n_rows, *, tail, alpha=0.05, max_null=None):
    """Westfall-Young step-down max-statistic correction from successive-maxima counts.

    Parameters
    ----------
    observed_stat : ndarray of float, any shape (P points)
        The observed statistic per point, as given to ``StepDownCollector``.
    counts : ndarray of int, shape (P,)
        ``StepDownCollector``'s ``.count`` array (merged over shards).
    n_rows : int
        Number of permutation-table rows counted, identity included.
    tail : {"two-sided", "greater", "less"}
    alpha : float, optional
        Family-wise error level. Default 0.05.
    max_null : ndarray of float, shape (n_rows,), optional
        The max-statistic null, stored as ``null`` in the result if given.

    Returns
    -------
    CorrectionResult
        ``p_corrected`` (shape of ``observed_stat``): counts / n_rows made
        monotone by a cumulative maximum in rank order, so a more significant
        point never has a larger adjusted p; tied points get equal adjusted
        p. ``mask`` = p <= alpha. ``threshold`` (kind ``"stat"``,
        tail-transformed scale) is the smallest statistic declared
        significant, None when none is.

    References
    ----------
    Westfall PH, Young SS (1993). Resampling-Based Multiple Testing. Wiley.
    """
    observed = np.asarray(observed_stat, dtype=float)
    transformed = transformed_observed(observed, tail)
    _check_alpha(alpha)
    counts = np.asarray(counts)
    if counts.shape != (transformed.size,):
        raise ValueError(f"step-down counts must have shape ({transformed.size},); got {counts.shape}")
    if not (isinstance(n_rows, (int, np.integer)) and n_rows >= 1):
        raise ValueError(f"n_rows must be a positive integer; got {n_rows!r}")
    if counts.min() < 0 or counts.max() > n_rows:
        raise ValueError(f"step-down counts must lie in [0, n_rows = {n_rows}]; found {counts.min()} to {counts.max()}")
    null = None if max_null is None else _check_max_null(max_null)
    order = rank_order(transformed)
    p = np.empty(transformed.size)
    p[order] = np.maximum.accumulate(counts[order] / n_rows)
    _check_identity_counted(p)
    mask = p <= alpha
    threshold = float(transformed[mask].min()) if mask.any() else None
    return CorrectionResult(
        method="max-stat-step-down",
        p_corrected=p.reshape(observed.shape),
        mask=mask.reshape(observed.shape),
        threshold=threshold,
        threshold_kind="stat",
        null=null,
        settings={"alpha": float(alpha), "m": int(transformed.size), "tail": tail, "n_rows": int(n_rows)},
    )


def single_step_family(observed_list, max_null_list, *, tail, alpha=0.05):
    """Single-step max-statistic over several contrasts sharing the permutation rows.

    Parameters
    ----------
    observed_list : list of ndarray of float
        The observed statistic of each contrast, any shapes.
    max_null_list : list of ndarray of float, each shape (n_rows,)
        Each contrast's max null over the same table rows.
    tail, alpha
        As in :func:`single_step`.

    Returns
    -------
    list of CorrectionResult
        One per contrast, all using the elementwise maximum of the max nulls;
        ``settings["m"]`` counts the points of all contrasts.
    """
    if len(observed_list) == 0 or len(observed_list) != len(max_null_list):
        raise ValueError(
            f"expected one max null per contrast; got {len(observed_list)} contrasts and {len(max_null_list)} nulls"
        )
    nulls = [_check_max_null(null) for null in max_null_list]
    if len({null.size for null in nulls}) != 1:
        raise ValueError(f"the max nulls of the contrasts differ in length: {[null.size for null in nulls]}")
    joint_null = np.max(np.stack(nulls), axis=0)
    m = sum(np.size(observed) for observed in observed_list)
    results = []
    for observed in observed_list:
        result = single_step(observed, joint_null, tail=tail, alpha=alpha)
        results.append(_with_family(result, m, len(observed_list)))
    return results


def step_down_family(observed_list, counts, n_rows, *, tail, alpha=0.05, max_null=None):
    """Step-down max-statistic over several contrasts ranked jointly.

    Parameters
    ----------
    observed_list : list of ndarray of float
        The observed statistic of each contrast, any shapes, in the order
        their flattened points were concatenated for ``StepDownCollector``.
    counts : ndarray of int, shape (total points,)
        The collector's merged ``.count`` array over the concatenated points.
    n_rows, tail, alpha, max_null
        As in :func:`step_down` (``max_null`` is the joint max null).

    Returns
    -------
    list of CorrectionResult
        One per contrast, shaped like its input; adjusted p, mask and
        threshold come from the joint step-down over all points.
    """
    if len(observed_list) == 0:
        raise ValueError("expected at least one contrast, got none")
    arrays = [np.asarray(observed, dtype=float) for observed in observed_list]
    joint = step_down(
        np.concatenate([a.ravel() for a in arrays]), counts, n_rows, tail=tail, alpha=alpha, max_null=max_null
    )
    results = []
    start = 0
    for a in arrays:
        stop = start + a.size
        part = dataclasses.replace(
            joint,
            p_corrected=joint.p_corrected[start:stop].reshape(a.shape),
            mask=joint.mask[start:stop].reshape(a.shape),
        )
        results.append(_with_family(part, joint.settings["m"], len(arrays)))
        start = stop
    return results


def _with_family(result, m, n_contrasts):
    """``result`` with the family's point count and number of contrasts in its settings."""
    return dataclasses.replace(result, settings={**result.settings, "m": int(m), "contrasts": int(n_contrasts)})


def _exceedance(sorted_null, values):
    """#{null >= v} for each v, given the null sorted ascending."""
    return sorted_null.size - np.searchsorted(sorted_null, values, side="left")


def _check_identity_counted(p):
    """Row 0 (the identity) counts for every point, so no p may be 0."""
    n_zero = int(np.count_nonzero(p == 0))
    if n_zero:
        raise ValueError(
            f"p of 0 at {n_zero} points: the null must include the identity row (row 0 of the permutation "
            "table), computed exactly as the observed statistic"
        )


def _check_alpha(alpha):
    if not (isinstance(alpha, (int, float, np.floating)) and 0 < alpha < 1):
        raise UserError(f"alpha must be a number strictly between 0 and 1; got {alpha!r}")


def _check_max_null(max_null):
    """The max null as a float64 (n_rows,) array without NaN."""
    null = np.asarray(max_null, dtype=np.float64)
    if null.ndim != 1 or null.size == 0:
        raise ValueError(f"max null must be a non-empty 1-D array (one value per table row); got shape {null.shape}")
    if np.isnan(null).any():
        raise ValueError("max null contains NaN: the statistic was undefined at some point in some permutation")
    return null
