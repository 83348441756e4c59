"""The Freedman-Lane permutation null of a regression's tested coefficient.

Model y = [1, N] g + b1 c + error (c the tested covariate, N the nuisance
columns). Freedman & Lane (1983): fit the reduced model [1, N], permute its
residuals e among the subjects, add back its fit, refit the full model and
take the t of b1. Row semantics: subject i takes the residual of subject
``row[i]``; row 0 (the identity) gives the observed t.

Fast path (vectorised over points and permutations). Let U = [u, Q'] be
orthonormal, u the tested covariate with the reduced model projected out,
scaled to unit length, and Q' an orthonormal basis of the nuisance columns
centred (orthogonal to the intercept). The permuted data y* = H y + P e
has R_Z y* = R_Z P e, so with a = U' P e (one weighted sum per vector)

    t = a_0 sqrt(n - p) / sqrt(||e||^2 - (1'e)^2 / n - sum_k a_k^2),

exactly the OLS t of b1 on y* (Frisch-Waugh-Lovell). a = (U permuted)' e:
a weighted sum over subjects in subject order per vector and row
(`famwise.kernels.regression_t`), so each row's bits do not depend on its
block, shard or thread.

References
----------
Freedman D, Lane D (1983). A nonstochastic interpretation of reported
significance levels. J Bus Econ Stat 1(4):292-298.
Winkler AM, Ridgway GR, Webster MA, Smith SM, Nichols TE (2014). Permutation
inference for the general linear model. NeuroImage 92:381-397.
"""

import numpy as np

from famwise.kernels.regression_t import SUBJECTS_PER_PASS, VECTORS_PER_PASS, _freedman_lane_t
from famwise.kernels.resampled_stats import _weighted_sums
from famwise.stats.regression import design_matrix


def reduced_basis(covariate: np.ndarray, nuisance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Orthonormal bases of the reduced model and of the tested direction.

    Returns
    -------
    reduced : ndarray of float64, shape (n, 1 + q)
        Orthonormal columns spanning [1, N], the first proportional to 1.
    tested : ndarray of float64, shape (n,)
        The tested covariate with [1, N] projected out, unit length.
    """
    n = covariate.shape[0]
    reduced, _ = np.linalg.qr(np.column_stack([np.ones(n), nuisance.reshape(n, -1)]))
    tested = covariate - reduced @ (reduced.T @ covariate)
    return reduced, tested / np.linalg.norm(tested)


def reduced_residuals(x: np.ndarray, reduced: np.ndarray) -> np.ndarray:
    """e = x - Q (Q' x), float64 (n, P); sums over subjects in subject order (the same bits in every shard)."""
    coefficients = np.empty((reduced.shape[1], x.shape[1]))
    _weighted_sums(np.ascontiguousarray(reduced.T), x, coefficients)
    residuals = np.array(x, dtype=np.float64, copy=True)
    for k in range(reduced.shape[1]):
        residuals -= reduced[:, k : k + 1] * coefficients[k]
    return residuals


def freedman_lane_block(x: np.ndarray, covariate: np.ndarray, nuisance: np.ndarray):
    """Prepare the data once; return f(rows_block, out=None) -> float32 (b, P) of t.

    Parameters
    ----------
    x : ndarray of float64, shape (n, P)
    covariate : ndarray of float64, shape (n,)
    nuisance : ndarray of float64, shape (n, q)

    Returns
    -------
    callable
        Takes int rows (b, n), permutations of subject indices (subject i
        takes the reduced model's residual of subject ``row[i]``).
    """
    n, n_points = x.shape
    df = float(n - design_matrix(covariate, nuisance).shape[1])
    reduced, tested = reduced_basis(covariate, nuisance)
    residuals = reduced_residuals(x, reduced)
    total = np.zeros(n_points)
    squares = np.zeros(n_points)
    for row in residuals:
        total += row
        squares += row * row
    ss = squares - total * total / n  # the intercept's share is the same in every permutation
    vectors = np.column_stack([tested, reduced[:, 1:]])  # (n, K): tested direction, nuisance basis
    n_vectors = vectors.shape[1]
    n_padded = -(-n // SUBJECTS_PER_PASS) * SUBJECTS_PER_PASS
    padded = np.zeros((n_padded, n_points))
    padded[:n] = residuals

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], n_points), dtype=np.float32)
        inverse = np.argsort(rows, axis=1)  # subject j's residual goes to subject inverse[j]
        n_weights = -(-rows.shape[0] * n_vectors // VECTORS_PER_PASS) * VECTORS_PER_PASS
        weights = np.zeros((n_weights, n_padded))
        weights[: rows.shape[0] * n_vectors, :n] = np.transpose(vectors[inverse], (0, 2, 1)).reshape(-1, n)
        _freedman_lane_t(weights, padded, ss, df, n_vectors, out)
        return out

    return block


def freedman_lane_dataset(x: np.ndarray, covariate: np.ndarray, nuisance: np.ndarray, order: np.ndarray):
    """A data set of the reduced model: its fit plus its residuals in ``order`` (same dtype as ``x``).

    Calibration's null datasets: the nuisance covariates keep their effects,
    the tested covariate has none beyond them.
    """
    reduced, _ = reduced_basis(covariate, nuisance)
    values = np.asarray(x, dtype=np.float64)
    residuals = reduced_residuals(values, reduced)
    return (values - residuals + residuals[np.asarray(order)]).astype(x.dtype)
