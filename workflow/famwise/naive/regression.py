"""Naive Freedman-Lane null: for each row, permute the reduced model's residuals, refit by least squares.

The oracle of `famwise.nulls.freedman_lane` and the baseline of its bench
row: every permuted data set is built and fitted with ``numpy.linalg.lstsq``;
nothing is shared with famwise.stats or famwise.nulls.

References
----------
Freedman D, Lane D (1983). J Bus Econ Stat 1(4):292-298.
Winkler AM et al. (2014). Permutation inference for the general linear model. NeuroImage 92:381-397.
"""

import numpy as np


def ols_t(y, design, column=1):
    """OLS t of one coefficient per point, float64 (P,): b / sqrt(RSS / (n - p) [(X'X)^-1]_jj)."""
    n, p = design.shape
    beta, _, _, _ = np.linalg.lstsq(design, y, rcond=None)
    rss = np.sum((y - design @ beta) ** 2, axis=0)
    variance = rss / (n - p) * np.linalg.inv(design.T @ design)[column, column]
    return beta[column] / np.sqrt(variance)


def freedman_lane_null(x, rows, *, covariate, nuisance):
    """t of the tested covariate for every row, float64 (n_rows, P).

    Row semantics: subject i takes the reduced model's residual of subject ``row[i]``.
    """
    x = np.asarray(x, dtype=np.float64)
    n = x.shape[0]
    nuisance = np.asarray(nuisance, dtype=np.float64).reshape(n, -1)
    reduced = np.column_stack([np.ones(n), nuisance])
    full = np.column_stack([np.ones(n), np.asarray(covariate, dtype=np.float64), nuisance])
    gamma, _, _, _ = np.linalg.lstsq(reduced, x, rcond=None)
    fit = reduced @ gamma
    residuals = x - fit
    return np.array([ols_t(fit + residuals[np.asarray(row)], full) for row in rows])
