"""Regression of subject maps on a tested covariate with nuisance covariates, by ordinary least squares.

Model at each point: y = b0 + b1 c + N g + error, with y the subjects'
values (n,), c the tested covariate (n,) and N the coded nuisance columns
(n, q). The statistic is the t of b1, df = n - p with p = 2 + q parameters.
The permutation null (Freedman & Lane 1983) is in `famwise.nulls.freedman_lane`.
"""

import numpy as np

from famwise.errors import UserError

RANK_TOLERANCE = 1e-10
"""Relative singular value below which a design column counts as a combination of the others."""


def design_matrix(covariate: np.ndarray, nuisance: np.ndarray) -> np.ndarray:
    """The full design [1, c, N], float64 (n, 2 + q)."""
    n = covariate.shape[0]
    return np.column_stack([np.ones(n), covariate, nuisance.reshape(n, -1)])


def collinear_columns(design: np.ndarray) -> list[int] | None:
    """Indices of design columns that together are linearly dependent, or None when the design has full rank.

    Each column is scaled to unit length first, so that units do not matter;
    the columns named are those that carry weight in the singular vector of
    the smallest singular value.
    """
    norms = np.linalg.norm(design, axis=0)
    scaled = design / np.where(norms > 0, norms, 1.0)
    _, sv, vt = np.linalg.svd(scaled, full_matrices=False)
    if sv.size == design.shape[1] and sv[-1] > RANK_TOLERANCE * max(sv[0], 1.0) and np.all(norms > 0):
        return None
    if np.any(norms == 0):
        return [int(i) for i in np.flatnonzero(norms == 0)]
    weights = np.abs(vt[-1])
    return [int(i) for i in np.flatnonzero(weights > 1e-6 * weights.max())]


def check_regression(covariate, nuisance, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Check the tested covariate and nuisance columns of n subjects; return them as float64.

    Returns
    -------
    covariate : ndarray of float64, shape (n,)
    nuisance : ndarray of float64, shape (n, q), q >= 0

    Raises
    ------
    UserError
        Missing or wrong-sized values, a constant covariate, a rank-deficient
        design (naming the design columns: 0 the intercept, 1 the tested
        covariate, 2.. the nuisance columns) or no degrees of freedom left.
    """
    if covariate is None:
        raise UserError("the regression test needs `covariate` (the tested covariate, one value per subject)")
    covariate = np.asarray(covariate, dtype=np.float64)
    if covariate.shape != (n,):
        raise UserError(f"`covariate` must hold one value per subject ({n}), got shape {covariate.shape}")
    nuisance = np.zeros((n, 0)) if nuisance is None else np.asarray(nuisance, dtype=np.float64)
    if nuisance.ndim != 2 or nuisance.shape[0] != n:
        raise UserError(f"`nuisance` must be (subjects, columns) with {n} subjects, got shape {nuisance.shape}")
    if not (np.isfinite(covariate).all() and np.isfinite(nuisance).all()):
        raise UserError("the regression's covariates must be finite (a missing value?)")
    if np.ptp(covariate) == 0:
        raise UserError(f"the tested covariate is the same for every subject ({covariate[0]:g}); it must vary")
    design = design_matrix(covariate, nuisance)
    df = n - design.shape[1]
    if df < 1:
        raise UserError(
            f"the regression has {design.shape[1]} parameters (intercept, tested covariate, {nuisance.shape[1]} "
            f"nuisance columns) but only {n} subjects; it needs more subjects than parameters"
        )
    collinear = collinear_columns(design)
    if collinear is not None:
        raise UserError(f"the regression design is rank-deficient: columns {collinear} are collinear")
    return np.ascontiguousarray(covariate), np.ascontiguousarray(nuisance)


def regression_t(x: np.ndarray, covariate: np.ndarray, nuisance: np.ndarray):
    """OLS t of the tested coefficient at every point.

    Parameters
    ----------
    x : ndarray of float64, shape (n, P)
    covariate : ndarray of float64, shape (n,)
    nuisance : ndarray of float64, shape (n, q)

    Returns
    -------
    t : ndarray (P,)
        b1 / se(b1), se(b1) = sqrt(RSS / (n - p) [(X'X)^-1]_11).
    df : ndarray, shape ()
        n - p.
    slope : ndarray (P,)
        b1, in the map's unit per unit of the covariate.
    partial_r : ndarray (P,)
        The partial correlation of the maps with the covariate given the
        nuisance covariates, t / sqrt(t^2 + df).
    """
    design = design_matrix(covariate, nuisance)
    n, p = design.shape
    beta, _, _, _ = np.linalg.lstsq(design, x, rcond=None)
    residual = x - design @ beta
    df = float(n - p)
    rss = np.sum(residual**2, axis=0)
    inverse = np.linalg.inv(design.T @ design)
    t = beta[1] / np.sqrt(rss / df * inverse[1, 1])
    return t, np.asarray(df), beta[1], t / np.sqrt(t**2 + df)
