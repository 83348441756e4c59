"""p-value procedures: Bonferroni, Sidak, Holm, Hochberg, Benjamini-Hochberg, Benjamini-Yekutieli.

Each procedure takes the p-values of one family of tests (parametric, or
permutation p-values from the shard exceedance counts) and returns adjusted
p-values and a mask at the level ``alpha`` (the FDR level q for ``fdr-bh`` and
``fdr-by``). The step-wise procedures sort the p-values once, so a family of
10^6 points costs one sort.

For ``family: all-contrasts``, :func:`adjust_family` adjusts the points of all
contrasts as one family (m counts them all) and splits the result back.
"""

import dataclasses

import numpy as np

from famwise.correct.result import CorrectionResult
from famwise.errors import UserError

METHODS = ("bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by")


def adjust(p, *, method, alpha=0.05):
    """Adjust the p-values of one family of tests.

    Parameters
    ----------
    p : array_like of float, any shape
        Unadjusted p-values in [0, 1], one per tested point; no NaN.
    method : {"bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by"}
        The procedure.
    alpha : float, optional
        Family-wise error level, or the FDR level q for ``fdr-bh`` and
        ``fdr-by``. Default 0.05.

    Returns
    -------
    CorrectionResult
        ``p_corrected`` (shape of ``p``, capped at 1) and ``mask``
        (``p_corrected <= alpha``). ``threshold`` is the per-test level for
        Bonferroni (alpha / m) and Sidak (1 - (1 - alpha)^(1/m)); for Holm,
        Hochberg, BH and BY it is the largest raw p declared significant
        (None when none is). ``settings`` holds ``alpha`` and ``m``.

    Notes
    -----
    Adjusted p-values (p_(i) the i-th smallest of m, c(m) = sum_{k<=m} 1/k):

    - Bonferroni: min(1, m p); Sidak: 1 - (1 - p)^m.
    - Holm (step-down): max_{j<=i} min(1, (m - j + 1) p_(j)).
    - Hochberg (step-up): min_{j>=i} min(1, (m - j + 1) p_(j)).
    - BH: min_{j>=i} min(1, m p_(j) / j); BY: as BH with m c(m) in place of m.

    Tied p-values get equal adjusted p-values whatever their order.

    References
    ----------
    Holm S (1979). Scand J Stat 6(2):65-70.
    Hochberg Y (1988). Biometrika 75(4):800-802.
    Sidak Z (1967). JASA 62(318):626-633.
    Benjamini Y, Hochberg Y (1995). JRSS-B 57(1):289-300.
    Benjamini Y, Yekutieli D (2001). Ann Stat 29(4):1165-1188.
    """
    p = _check_adjust(p, method, alpha)
    flat = p.ravel()
    m = flat.size
    threshold = None
    if method == "bonferroni":
        adjusted = np.minimum(1.0, m * flat)
        threshold = alpha / m
    elif method == "sidak":
        with np.errstate(divide="ignore"):  # p = 1 gives log1p(-1) = -inf and an adjusted p of 1
            adjusted = -np.expm1(m * np.log1p(-flat))
        threshold = float(-np.expm1(np.log1p(-alpha) / m))
    else:
        adjusted = _stepwise(flat, method)
    adjusted = np.minimum(adjusted, 1.0)
    mask = adjusted <= alpha
    if threshold is None and mask.any():
        threshold = float(flat[mask].max())
    return CorrectionResult(
        method=method,
        p_corrected=adjusted.reshape(p.shape),
        mask=mask.reshape(p.shape),
        threshold=threshold,
        threshold_kind="p",
        settings={"alpha": float(alpha), "m": int(m)},
    )


def adjust_family(p_list, *, method, alpha=0.05):
    """Adjust the p-values of several contrasts as one family.

    Parameters
    ----------
    p_list : list of array_like of float
        The p-values of each contrast, any shapes.
    method, alpha
        As in :func:`adjust`.

    Returns
    -------
    list of CorrectionResult
        One per contrast, each shaped like its input; m (in ``settings``)
        counts the points of all contrasts, ``settings["contrasts"]`` their
        number. ``threshold`` is the family's (the same for every contrast).
    """
    if len(p_list) == 0:
        raise UserError("all-contrasts family: expected at least one contrast, got none")
    arrays = [np.asarray(p, dtype=float) for p in p_list]
    joint = adjust(np.concatenate([a.ravel() for a in arrays]), method=method, alpha=alpha)
    settings = {**joint.settings, "contrasts": len(arrays)}
    results = []
    start = 0
    for a in arrays:
        stop = start + a.size
        results.append(
            dataclasses.replace(
                joint,
                p_corrected=joint.p_corrected[start:stop].reshape(a.shape),
                mask=joint.mask[start:stop].reshape(a.shape),
                settings=settings,
            )
        )
        start = stop
    return results


def _stepwise(p, method):
    """Adjusted p of Holm, Hochberg, BH or BY for flat ``p`` (m,), in input order."""
    m = p.size
    order = np.argsort(p, kind="stable")
    sorted_p = p[order]
    rank = np.arange(1, m + 1, dtype=float)
    if method == "holm":
        scaled = np.minimum(1.0, (m - rank + 1) * sorted_p)
        monotone = np.maximum.accumulate(scaled)
    else:
        if method == "hochberg":
            scaled = (m - rank + 1) * sorted_p
        elif method == "fdr-bh":
            scaled = m * sorted_p / rank
        else:  # fdr-by
            scaled = m * np.sum(1.0 / rank) * sorted_p / rank
        monotone = np.minimum.accumulate(scaled[::-1])[::-1]
    adjusted = np.empty(m)
    adjusted[order] = monotone
    return adjusted


def _check_adjust(p, method, alpha):
    """Validate the inputs of :func:`adjust`; return ``p`` as a float array."""
    if method not in METHODS:
        raise UserError(f"correction method must be one of {', '.join(METHODS)}; got {method!r}")
    if not (isinstance(alpha, (int, float, np.floating)) and 0 < alpha < 1):
        raise UserError(f"alpha must be a number strictly between 0 and 1; got {alpha!r}")
    p = np.asarray(p, dtype=float)
    if p.size == 0:
        raise UserError(f"{method}: expected at least one p-value, got an empty family")
    n_nan = int(np.count_nonzero(np.isnan(p)))
    if n_nan:
        raise UserError(f"{method}: p-values must not be NaN; found {n_nan} NaN of {p.size} points")
    if p.min() < 0 or p.max() > 1:
        raise UserError(f"{method}: p-values must lie in [0, 1]; found values from {p.min():g} to {p.max():g}")
    return p
