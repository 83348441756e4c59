"""numba kernel of the permutation engine: the between-groups F of blocks of relabelled data sets.

Called by `famwise.nulls.between_block`, which orders each row's groups and
documents the fast path. Group sums run over subjects in subject order, so
every row's value is the same whatever the block, tile or thread.
"""

import numpy as np

from famwise.kernels._jit import jit_parallel, prange


@jit_parallel
def _between_f(position, sizes, x, ss_total, df1, df2, tile_size, out):
    """out[r, p] = one-way F of row r at point p.

    ``position[r, i]`` is the place (0 .. k - 1) of subject i's group in row
    r's group order and ``sizes[r, j]`` the size of the group in place j;
    ``x`` (n, P) the grand-mean-centred data, ``ss_total`` (P,) its sum of
    squares. SS_between = sum_j S_j^2 / n_j in place order, SS_within =
    max(ss_total - SS_between, 0). Parallel over tiles of points.
    """
    b, n = position.shape
    k = sizes.shape[1]
    n_points = x.shape[1]
    n_tiles = (n_points + tile_size - 1) // tile_size
    for tile in prange(n_tiles):
        p0 = tile * tile_size
        m = min(n_points, p0 + tile_size) - p0
        sums = np.empty((k, m))
        for r in range(b):
            sums[:] = 0.0
            for i in range(n):
                acc = sums[position[r, i]]
                row = x[i, p0 : p0 + m]
                for q in range(m):
                    acc[q] += row[q]
            dst = out[r, p0 : p0 + m]
            for q in range(m):
                ss_between = 0.0
                for j in range(k):
                    ss_between += sums[j, q] * sums[j, q] / sizes[r, j]
                ss_within = ss_total[p0 + q] - ss_between
                if ss_within < 0.0:
                    ss_within = 0.0
                dst[q] = (ss_between / df1) / (ss_within / df2)
