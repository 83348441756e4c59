"""numba kernels of the permutation engine: statistics of blocks of resampled data sets.

Called by `famwise.nulls.engine`, which prepares the data (integer grids,
subset codes, sort orders) and documents the fast paths. Sums over subjects
run in subject order or are exact on an integer grid, so every row's value
is the same whatever the block, tile or thread.
"""

import numpy as np

from famwise.kernels._jit import jit, jit_parallel, prange

_CHUNK = 2048  # points per parallel chunk of the weighted and condition sums


@jit
def _subset_tables(grid, p0, group, low, step, tables):
    """Subset sums of a tile: tables[g, c, q] = sum_j (low + step * bit j of c) * grid[g * group + j, p0 + q].

    ``tables`` is (n_groups, 2^group, m) for the m points from ``p0``; each
    entry adds step * x_j to an entry with one bit fewer. Exact on an
    integer grid, so every way of summing gives the same bits.
    """
    n = grid.shape[0]
    m = tables.shape[2]
    for g in range(tables.shape[0]):
        first = g * group
        size = min(group, n - first)
        entry = tables[g]
        entry[0] = 0.0
        if low != 0.0:
            for j in range(size):
                x_j = grid[first + j, p0 : p0 + m]
                for q in range(m):
                    entry[0, q] += low * x_j[q]
        for c in range(1, 1 << size):
            j = 0
            while not (c >> j) & 1:
                j += 1
            x_j = grid[first + j, p0 : p0 + m]
            previous = entry[c ^ (1 << j)]
            current = entry[c]
            for q in range(m):
                current[q] = previous[q] + step * x_j[q]


@jit
def _row_sum(tables, codes, sums):
    """sums[q] = sum over groups g of tables[g, codes[g], q]: one row's weighted sum over subjects."""
    n_groups = tables.shape[0]
    if n_groups == 1:
        sums[:] = tables[0, codes[0]]
        return
    first, second = tables[0, codes[0]], tables[1, codes[1]]
    for q in range(sums.shape[0]):
        sums[q] = first[q] + second[q]
    for g in range(2, n_groups - 1, 2):  # two groups per pass over sums
        first, second = tables[g, codes[g]], tables[g + 1, codes[g + 1]]
        for q in range(sums.shape[0]):
            sums[q] += first[q] + second[q]
    if n_groups % 2:
        last = tables[n_groups - 1, codes[n_groups - 1]]
        for q in range(sums.shape[0]):
            sums[q] += last[q]


@jit_parallel
def _signflip_t(codes, grid, n_ss, factor, group, tile_size, out):
    """out[r, p] = one-sample t of the flipped integer-grid data, from subset-sum tables.

    Subjects form groups of ``group``; for each tile of ``tile_size`` points,
    table entry (g, c) holds the group's sum with signs +1 where bit j of c
    is set (subject g * group + j) and -1 elsewhere (``_subset_tables``). A
    row's flipped sum S is then one entry per group (``codes[r, g]``): about
    4x fewer additions than the product signs @ grid, all exact, so S equals
    that product bit for bit. t = S sqrt(n - 1) / sqrt(n ss - S^2) (mean /
    (SD / sqrt(n))), the difference in float64, the rest in float32.
    Parallel over tiles.
    """
    n_points = grid.shape[1]
    b, n_groups = codes.shape
    n_tiles = (n_points + tile_size - 1) // tile_size
    for tile in prange(n_tiles):
        p0 = tile * tile_size
        m = min(n_points, p0 + tile_size) - p0
        tables = np.empty((n_groups, 1 << group, m))
        _subset_tables(grid, p0, group, -1.0, 2.0, tables)
        sums = np.empty(m)
        n_ss_tile = n_ss[p0 : p0 + m]
        for r in range(b):
            _row_sum(tables, codes[r], sums)
            dst = out[r, p0 : p0 + m]
            for q in range(m):
                s = sums[q]
                d = n_ss_tile[q] - s * s
                if d < 0.0:
                    d = 0.0
                dst[q] = np.float32(s * factor) / np.sqrt(np.float32(d))


@jit_parallel
def _label_t(codes, grid_x, grid_q, total_x, total_q, unit_x, unit_q, n0, n1, equal_var, group, tile_size, out):
    """out[r, p] = two-sample t (label 0 minus label 1), from exact group-0 sums of subset-sum tables.

    ``codes[r]`` flags the subjects labelled 0 in row r (groups of
    ``group``, as in `_signflip_t`); the group-0 sums of the centred data's
    grid and of its squares' grid come from tables with weights 0 / 1, and
    group 1 takes the totals minus group 0. ``unit_*`` convert grid units
    back to data units (powers of two). Parallel over tiles.
    """
    n_points = grid_x.shape[1]
    b, n_groups = codes.shape
    n_tiles = (n_points + tile_size - 1) // tile_size
    pooled = (1.0 / n0 + 1.0 / n1) / (n0 + n1 - 2)
    for tile in prange(n_tiles):
        p0 = tile * tile_size
        m = min(n_points, p0 + tile_size) - p0
        tables_x = np.empty((n_groups, 1 << group, m))
        tables_q = np.empty((n_groups, 1 << group, m))
        _subset_tables(grid_x, p0, group, 0.0, 1.0, tables_x)
        _subset_tables(grid_q, p0, group, 0.0, 1.0, tables_q)
        sum_x = np.empty(m)
        sum_q = np.empty(m)
        for r in range(b):
            _row_sum(tables_x, codes[r], sum_x)
            _row_sum(tables_q, codes[r], sum_q)
            dst = out[r, p0 : p0 + m]
            for q in range(m):
                p = p0 + q
                s0 = sum_x[q] * unit_x[p]
                s1 = (total_x[p] - sum_x[q]) * unit_x[p]
                m0 = s0 / n0
                m1 = s1 / n1
                ss0 = max(sum_q[q] * unit_q[p] - s0 * m0, 0.0)
                ss1 = max((total_q[p] - sum_q[q]) * unit_q[p] - s1 * m1, 0.0)
                if equal_var:
                    se = np.sqrt((ss0 + ss1) * pooled)
                else:
                    se = np.sqrt(ss0 / ((n0 - 1) * n0) + ss1 / ((n1 - 1) * n1))
                dst[q] = (m0 - m1) / se


@jit_parallel
def _weighted_sums(w, x, out):
    """out[r, p] = sum_i w[r, i] x[i, p], summed in subject order."""
    b, n = w.shape
    n_points = x.shape[1]
    n_chunks = (n_points + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        p0 = c * _CHUNK
        m = min(n_points, p0 + _CHUNK) - p0
        acc = np.empty(m)
        for r in range(b):
            acc[:] = 0.0
            for i in range(n):
                s = w[r, i]
                for q in range(m):
                    acc[q] += s * x[i, p0 + q]
            for q in range(m):
                out[r, p0 + q] = acc[q]


@jit_parallel
def _condition_sums(perm, x, out):
    """out[r, j, p] = sum_i x[i, perm[r, i, j], p], summed in subject order."""
    b, n, k = perm.shape
    n_points = x.shape[2]
    n_chunks = (n_points + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        p0 = c * _CHUNK
        m = min(n_points, p0 + _CHUNK) - p0
        acc = np.empty(m)
        for r in range(b):
            for j in range(k):
                acc[:] = 0.0
                for i in range(n):
                    src = perm[r, i, j]
                    for q in range(m):
                        acc[q] += x[i, src, p0 + q]
                for q in range(m):
                    out[r, j, p0 + q] = acc[q]


@jit
def _trimmed_stats(buf, g):
    """Trimmed mean and Winsorized variance (ddof 1) of a sorted array."""
    n = buf.size
    h = n - 2 * g
    s = 0.0
    for i in range(g, n - g):
        s += buf[i]
    lo = buf[g]
    hi = buf[n - g - 1]
    wm = (s + g * lo + g * hi) / n
    v = g * (lo - wm) ** 2 + g * (hi - wm) ** 2
    for i in range(g, n - g):
        v += (buf[i] - wm) ** 2
    return s / h, v / (n - 1)


@jit_parallel
def _signflip_yuen(signs, values, by_size, g, scale, out):
    """out[r, p] = one-sample trimmed t of point p's values flipped by signs[r].

    ``values[p]`` holds the point's values in ascending |value| order and
    ``by_size[p]`` their subjects, so the flipped values come out sorted in
    two linear passes: the negative ones by descending size, then the others
    by ascending size (branch-free appends). Same sorted values, same sums,
    as sorting each flipped row. Every value is written before the pointer
    decides to keep it, so a pass whose last value is not kept writes one
    slot past the n kept ones: the buffer has n + 1 slots, the last a
    scratch slot outside the statistics.
    """
    b, n = signs.shape
    for r in prange(b):
        scratch = np.empty(n + 1)
        buf = scratch[:n]
        s = signs[r]
        for p in range(values.shape[0]):
            v_p = values[p]
            subjects = by_size[p]
            filled = 0
            for k in range(n - 1, -1, -1):
                v = s[subjects[k]] * v_p[k]
                scratch[filled] = v
                filled += v < 0.0
            for k in range(n):
                v = s[subjects[k]] * v_p[k]
                scratch[filled] = v
                filled += v >= 0.0
            mean_t, var_w = _trimmed_stats(buf, g)
            out[r, p] = mean_t / (np.sqrt(var_w) / scale)


@jit_parallel
def _label_yuen(labels, values, by_value, n0, n1, g0, g1, equal_var, out):
    """out[r, p] = two-sample trimmed t (label 0 minus label 1) of point p under labels[r].

    ``values[p]`` holds the point's values in ascending order and
    ``by_value[p]`` their subjects, so each group's values come out sorted
    by one linear pass that deals them to the two groups (branch-free: both
    buffers are written, one pointer advances). Same sorted values, same
    sums, as sorting each group.
    """
    b, n = labels.shape
    h0 = n0 - 2 * g0
    h1 = n1 - 2 * g1
    for r in prange(b):
        deal_a = np.empty(n + 1)
        deal_c = np.empty(n + 1)
        to_a = np.empty(n, np.int64)
        for i in range(n):
            to_a[i] = labels[r, i] == 0
        a = deal_a[:n0]
        c = deal_c[:n1]
        for p in range(values.shape[0]):
            v_p = values[p]
            subjects = by_value[p]
            ia = 0
            ic = 0
            for k in range(n):
                v = v_p[k]
                first = to_a[subjects[k]]
                deal_a[ia] = v
                deal_c[ic] = v
                ia += first
                ic += 1 - first
            ma, va = _trimmed_stats(a, g0)
            mc, vc = _trimmed_stats(c, g1)
            va = va * (n0 - 1) / (h0 - 1)
            vc = vc * (n1 - 1) / (h1 - 1)
            if equal_var:
                pooled = ((h0 - 1) * va + (h1 - 1) * vc) / (h0 + h1 - 2)
                se = np.sqrt(pooled * (1.0 / h0 + 1.0 / h1))
            else:
                se = np.sqrt(va / h0 + vc / h1)
            out[r, p] = (ma - mc) / se
