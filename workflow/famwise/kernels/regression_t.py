"""numba kernel of the Freedman-Lane permutation null: t of a tested coefficient for blocks of permuted residuals.

Called by `famwise.nulls.freedman_lane`, which prepares the orthonormal
vectors and the reduced model's residuals. Sums over subjects run in subject
order, so every row's value is the same whatever the block, chunk or thread.
"""

import numpy as np

from famwise.kernels._jit import jit_parallel, prange

_CHUNK = 2048  # points per parallel chunk: the chunk of residuals stays in cache across a block's rows


@jit_parallel
def _freedman_lane_t(weights, residuals, ss, df, out):
    """out[r, p] = a_0 sqrt(df) / sqrt(ss[p] - sum_k a_k^2), a_k = sum_i weights[r, k, i] residuals[i, p].

    ``weights`` (b, K, n) float64: row r's K orthonormal vectors (the tested
    direction first, then the nuisance basis) with their subjects permuted;
    ``residuals`` (n, P) float64; ``ss`` (P,) the residual sum of squares of
    the reduced model; ``out`` (b, P) float32. A residual sum of squares
    rounded below 0 counts as 0. Parallel over chunks of points.
    """
    b, n_vectors, n = weights.shape
    n_points = residuals.shape[1]
    root_df = np.sqrt(df)
    n_chunks = (n_points + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        p0 = c * _CHUNK
        m = min(n_points, p0 + _CHUNK) - p0
        acc = np.empty((n_vectors, m))
        for r in range(b):
            acc[:] = 0.0
            for i in range(n):
                e_i = residuals[i, p0 : p0 + m]
                for k in range(n_vectors):
                    s = weights[r, k, i]
                    row = acc[k]
                    for q in range(m):
                        row[q] += s * e_i[q]
            for q in range(m):
                rss = ss[p0 + q]
                for k in range(n_vectors):
                    rss -= acc[k, q] * acc[k, q]
                out[r, p0 + q] = acc[0, q] * root_df / np.sqrt(max(rss, 0.0))
