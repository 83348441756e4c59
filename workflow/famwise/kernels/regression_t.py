"""numba kernel of the Freedman-Lane permutation null: t of a tested coefficient for blocks of permuted residuals.

Called by `famwise.nulls.freedman_lane`, which prepares the weight vectors
(each row's orthonormal vectors with their subjects permuted) and the
reduced model's residuals. Each weighted sum over subjects runs in subject
order, a = (((0 + w_0 e_0) + w_1 e_1) + ...): written four subjects per
pass (``a + w_0 e_0 + ... + w_3 e_3`` adds left to right, the same order)
and four vectors per pass (they share the loads of the residuals); padding
subjects have weight 0 and residual 0 and add an exact 0. So every row's
value is the same whatever the block, the vectors beside it, the chunk or
the thread.
"""

import numpy as np

from famwise.kernels._jit import jit_inline, jit_parallel, prange

_CHUNK = 256  # points per parallel chunk: four vectors' sums stay in L1, the chunk of residuals in L2
SUBJECTS_PER_PASS = 4
VECTORS_PER_PASS = 4


@jit_inline
def _four_by_four(acc, v, w, residuals, i, p0, p1):
    """acc[v + j] += sum over subjects i..i+3 of w[v + j, s] residuals[s, p0:p1], left to right, j < 4.

    For i = 0 the sums are written, not added: 0 + w_0 e_0 equals w_0 e_0.
    """
    e0, e1 = residuals[i, p0:p1], residuals[i + 1, p0:p1]
    e2, e3 = residuals[i + 2, p0:p1], residuals[i + 3, p0:p1]
    a0, a1, a2, a3 = acc[v], acc[v + 1], acc[v + 2], acc[v + 3]
    s0, s1, s2, s3 = w[v, i], w[v, i + 1], w[v, i + 2], w[v, i + 3]
    t0, t1, t2, t3 = w[v + 1, i], w[v + 1, i + 1], w[v + 1, i + 2], w[v + 1, i + 3]
    u0, u1, u2, u3 = w[v + 2, i], w[v + 2, i + 1], w[v + 2, i + 2], w[v + 2, i + 3]
    r0, r1, r2, r3 = w[v + 3, i], w[v + 3, i + 1], w[v + 3, i + 2], w[v + 3, i + 3]
    if i == 0:
        for q in range(a0.shape[0]):
            x0, x1, x2, x3 = e0[q], e1[q], e2[q], e3[q]
            a0[q] = s0 * x0 + s1 * x1 + s2 * x2 + s3 * x3
            a1[q] = t0 * x0 + t1 * x1 + t2 * x2 + t3 * x3
            a2[q] = u0 * x0 + u1 * x1 + u2 * x2 + u3 * x3
            a3[q] = r0 * x0 + r1 * x1 + r2 * x2 + r3 * x3
        return
    for q in range(a0.shape[0]):
        x0, x1, x2, x3 = e0[q], e1[q], e2[q], e3[q]
        a0[q] = a0[q] + s0 * x0 + s1 * x1 + s2 * x2 + s3 * x3
        a1[q] = a1[q] + t0 * x0 + t1 * x1 + t2 * x2 + t3 * x3
        a2[q] = a2[q] + u0 * x0 + u1 * x1 + u2 * x2 + u3 * x3
        a3[q] = a3[q] + r0 * x0 + r1 * x1 + r2 * x2 + r3 * x3


@jit_parallel
def _freedman_lane_t(weights, residuals, ss, df, n_vectors, out):
    """out[r, p] = a_0 sqrt(df) / sqrt(ss[p] - sum_k a_k^2), a_k = sum_i weights[r K + k, i] residuals[i, p].

    ``weights`` (V, n4) float64: row r's K = ``n_vectors`` orthonormal vectors
    (the tested direction first, then the nuisance basis) with their subjects
    permuted, at rows r K .. r K + K - 1; V and n4 multiples of 4, the
    padding 0. ``residuals`` (n4, P) float64, padding rows 0; ``ss`` (P,) the
    reduced model's residual sum of squares; ``out`` (b, P) float32. A
    residual sum of squares rounded below 0 counts as 0. Parallel over
    chunks of points.
    """
    n_padded = weights.shape[1]
    n_points = residuals.shape[1]
    root_df = np.sqrt(df)
    n_chunks = (n_points + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        p0 = c * _CHUNK
        p1 = min(n_points, p0 + _CHUNK)
        acc = np.empty((weights.shape[0], p1 - p0))
        for v in range(0, weights.shape[0], VECTORS_PER_PASS):
            for i in range(0, n_padded, SUBJECTS_PER_PASS):
                _four_by_four(acc, v, weights, residuals, i, p0, p1)
        for r in range(out.shape[0]):
            for q in range(p1 - p0):
                rss = ss[p0 + q]
                for k in range(n_vectors):
                    rss -= acc[r * n_vectors + k, q] * acc[r * n_vectors + k, q]
                out[r, p0 + q] = acc[r * n_vectors, q] * root_df / np.sqrt(max(rss, 0.0))
