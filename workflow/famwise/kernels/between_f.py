"""numba kernel of the permutation engine: the between-groups F of blocks of relabelled data sets.

Called by `famwise.nulls.between_block`, which orders each row's groups and
documents the fast path. Group sums run over subjects in subject order, so
every row's value is the same whatever the block, tile or thread.
"""

import numpy as np

from famwise.kernels._jit import jit_parallel, prange


@jit_parallel
def _between_f(position, inverse_sizes, x, total, ss_total, df_ratio, tile_size, out):
    """out[r, p] = one-way F of row r at point p.

    ``position[r, i]`` is the place (0 .. k - 1) of subject i's group in row
    r's group order and ``inverse_sizes[r, j]`` one over the size of the
    group in place j; ``x`` (n, P) the grand-mean-centred data, ``total``
    (P,) its sum over subjects and ``ss_total`` (P,) its sum of squares.
    The sums S_j of places 0 .. k - 2 run over their subjects in subject
    order; the last place takes ``total`` minus them. SS_between =
    sum_j S_j^2 / n_j in place order, SS_within = max(ss_total -
    SS_between, 0), F = SS_between / SS_within * ``df_ratio`` ((n - k) /
    (k - 1)). Parallel over tiles of points.
    """
    b, n = position.shape
    k = inverse_sizes.shape[1]
    last = k - 1
    n_points = x.shape[1]
    n_tiles = (n_points + tile_size - 1) // tile_size
    for tile in prange(n_tiles):
        p0 = tile * tile_size
        m = min(n_points, p0 + tile_size) - p0
        sums = np.empty((k, m))
        for r in range(b):
            sums[:last] = 0.0
            for i in range(n):
                j = position[r, i]
                if j == last:
                    continue
                acc = sums[j]
                row = x[i, p0 : p0 + m]
                for q in range(m):
                    acc[q] += row[q]
            remaining = sums[last]
            for q in range(m):
                remaining[q] = total[p0 + q]
            for j in range(last):
                acc = sums[j]
                for q in range(m):
                    remaining[q] -= acc[q]
            dst = out[r, p0 : p0 + m]
            for q in range(m):
                ss_between = 0.0
                for j in range(k):
                    ss_between += sums[j, q] * sums[j, q] * inverse_sizes[r, j]
                ss_within = ss_total[p0 + q] - ss_between
                if ss_within < 0.0:
                    ss_within = 0.0
                dst[q] = ss_between / ss_within * df_ratio
