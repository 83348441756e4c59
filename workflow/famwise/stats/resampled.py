"""Statistics of blocks of resampled data sets: the permutation engine's fast paths.

Every function here gives, for a block of permutation-table rows, the
statistic map of each row, float32 (b, P). Each row's value at each point is
computed by the same operations in the same order whatever the block it
comes in, the block size, the number of blocks or the number of threads, so
the null is bit-identical for any sharding. Sums over subjects run in
subject order (numba kernels below), or are exact on an integer grid (the
t statistics), so that no summation order can change a bit.

Fast paths:

- sign flips, t: the per-point sum of squares does not change under sign
  flips, so t needs only the flipped sums. They come from subset-sum tables
  of the data rounded to an integer grid (every sum exact, see
  `integer_grid`): one table lookup per group of 4 subjects instead of 4
  multiply-adds, fused with the elementwise t in one numba kernel.
- labels (two-sample t): group-0 sums of the integer grids of the
  grand-mean-centred data and of its squares, from the same kind of tables
  (weights 0 / 1); group 1 takes the totals minus group 0.
- within-subject (F): condition sums of the subject-centred data; the
  within-subject sum of squares does not change.
- covariate (correlation): r is the permuted standardised covariate weighted
  sum of the standardised data.
- Yuen (sign flips and labels): no matrix-product form, because trimming
  depends on the order of the flipped or relabelled values. Sign flips: the
  values are sorted by size once per point, after which every flipped row
  comes out sorted in O(n). Labels: the values are sorted once per point and
  dealt to the two groups of each row in O(n).
"""

from collections.abc import Callable
from math import sqrt

import numpy as np
from numba import njit, prange

from famwise.stats.trimmed import n_trimmed

_CHUNK = 2048
_GROUP = 4  # subjects per subset-sum table (16 entries)
_TILE = 1024  # points per tile of the t kernels: their subset-sum tables stay in cache

BlockFunction = Callable[[np.ndarray], np.ndarray]


def block_function(x, *, test, groups=None, covariate=None, statistic="t", trim=0.2, equal_var=True) -> BlockFunction:
    """Prepare the data once; return f(rows_block, out=None) -> float32 (b, P).

    The t and Yuen paths write into ``out`` (float32, C-contiguous, shape
    (b, P)) when it is given, to spare a new allocation per block; the F and
    correlation paths return a new array.

    Parameters
    ----------
    x : ndarray of float64, (n, P) or (n, k, P)
        Checked data (see `famwise.stats.check_design`).
    test, groups, covariate, statistic, trim, equal_var
        As in `famwise.stats.compute`.

    Returns
    -------
    callable
        Takes rows of the permutation table: int8 signs (b, n) for one-sample
        and paired, int subject permutations (b, n) for two-sample and
        correlation, int within-subject condition permutations (b, n, k) for
        repeated measures. Row semantics: flipped data s_i x_i; subject i gets
        the label ``groups[row[i]]`` or the covariate ``covariate[row[i]]``;
        subject i's condition j takes the data of its condition ``row[i, j]``.
    """
    if test in ("one-sample", "paired"):
        return _signflip_yuen_block(x, trim) if statistic == "yuen" else _signflip_t_block(x)
    if test == "two-sample":
        if statistic == "yuen":
            return _label_yuen_block(x, groups, trim, equal_var)
        return _label_t_block(x, groups, equal_var)
    if test == "repeated-measures":
        return _within_f_block(x)
    return _covariate_block(x, covariate)


def _signflip_t_block(x):
    n, n_points = x.shape
    grid = integer_grid(x)
    n_ss = np.zeros(n_points)
    for row in grid:
        n_ss += row * row
    n_ss *= n
    factor = sqrt(n - 1.0)

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], n_points), dtype=np.float32)
        _signflip_t(_subset_codes(rows > 0), grid, n_ss, factor, _GROUP, _TILE, out)
        return out

    return block


def _subset_codes(selected: np.ndarray) -> np.ndarray:
    """(b, n) bool -> int64 (b, ceil(n / _GROUP)): bit j of code g is subject g * _GROUP + j's flag."""
    b, n = selected.shape
    n_groups = -(-n // _GROUP)
    padded = np.zeros((b, n_groups * _GROUP), dtype=np.int64)
    padded[:, :n] = selected
    return np.ascontiguousarray((padded.reshape(b, n_groups, _GROUP) << np.arange(_GROUP)).sum(axis=2))


def integer_grid(x: np.ndarray) -> np.ndarray:
    """Round each point's values to integers on a power-of-two grid, float64.

    Point p is scaled by 2^(B - e_p), where max_i |x_ip| < 2^e_p and
    B = 52 - ceil(log2 n), then rounded: every sum of n values times +-1 is
    an integer below 2^52 in magnitude, exact in float64 in any order. Sums
    of flips or of label groups can then be formed in any order (subset-sum
    tables, any tiling of the points, any threads) and stay bit-identical.
    The t statistic is scale free; the rounding changes it by about 2^-B
    relative to the point's largest |value| (below 1e-13 for n <= 64).

    Parameters
    ----------
    x : ndarray of float64, shape (n, P)

    Returns
    -------
    ndarray of float64, shape (n, P)
    """
    return _grid_and_scale(x)[0]


def _label_t_block(x, groups, equal_var):
    xc = x - x.mean(axis=0)
    grid_x, scale_x = _grid_and_scale(xc)
    grid_q, scale_q = _grid_and_scale(xc * xc)
    total_x, total_q = _column_sums(grid_x), _column_sums(grid_q)
    groups = np.asarray(groups, dtype=np.int64)
    n0 = int(np.count_nonzero(groups == 0))
    n1 = groups.size - n0

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], x.shape[1]), dtype=np.float32)
        _label_t(_subset_codes(groups[rows] == 0), grid_x, grid_q, total_x, total_q, 1.0 / scale_x, 1.0 / scale_q,
                 n0, n1, equal_var, _GROUP, _TILE, out)
        return out

    return block


def _grid_and_scale(v):
    """`integer_grid` of v and the per-point factor 2^k with grid ~= v * 2^k."""
    bits = 52 - int(np.ceil(np.log2(v.shape[0])))
    _, exponent = np.frexp(np.maximum(v.max(axis=0), -v.min(axis=0)))
    grid = np.ldexp(v, bits - exponent)
    return np.rint(grid, out=grid), np.ldexp(1.0, bits - exponent)


def _column_sums(grid):
    """Sums over subjects in subject order (exact on an integer grid)."""
    total = np.zeros(grid.shape[1])
    for row in grid:
        total += row
    return total


def _within_f_block(x):
    n, k = x.shape[:2]
    within = np.ascontiguousarray(x - x.mean(axis=1, keepdims=True))
    ss_within = np.sum(within**2, axis=(0, 1))
    df1, df2 = k - 1.0, (n - 1.0) * (k - 1.0)

    def block(rows, out=None):
        sums = np.empty((rows.shape[0], k, x.shape[2]))
        _condition_sums(np.ascontiguousarray(rows, dtype=np.int64), within, sums)
        ss_cond = sums[:, 0] ** 2
        for j in range(1, k):
            ss_cond += sums[:, j] ** 2
        ss_cond /= n
        ss_error = np.maximum(ss_within - ss_cond, 0.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            return ((ss_cond / df1) / (ss_error / df2)).astype(np.float32)

    return block


def _covariate_block(x, covariate):
    n = x.shape[0]
    xc = x - x.mean(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        z = np.ascontiguousarray(xc / np.sqrt(np.sum(xc**2, axis=0)))
    cc = covariate - covariate.mean()
    cz = cc / np.sqrt(np.sum(cc**2))

    def block(rows, out=None):
        r = np.clip(_weighted(np.ascontiguousarray(cz[rows]), z), -1.0, 1.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (r * np.sqrt((n - 2) / (1.0 - r**2))).astype(np.float32)

    return block


def _signflip_yuen_block(x, trim):
    n = x.shape[0]
    xt = np.ascontiguousarray(x.T)
    by_size = np.argsort(np.abs(xt), axis=1, kind="stable").astype(np.int32)
    values = np.ascontiguousarray(np.take_along_axis(xt, by_size, axis=1))
    g = n_trimmed(n, trim)
    scale = (1.0 - 2.0 * trim) * sqrt(n)

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], xt.shape[0]), dtype=np.float32)
        _signflip_yuen(np.ascontiguousarray(rows, dtype=np.float64), values, by_size, g, scale, out)
        return out

    return block


def _label_yuen_block(x, groups, trim, equal_var):
    xt = np.ascontiguousarray(x.T)
    by_value = np.argsort(xt, axis=1, kind="stable").astype(np.int32)
    values = np.ascontiguousarray(np.take_along_axis(xt, by_value, axis=1))
    groups = np.asarray(groups, dtype=np.int64)
    n0 = int(np.count_nonzero(groups == 0))
    n1 = groups.size - n0
    g0, g1 = n_trimmed(n0, trim), n_trimmed(n1, trim)

    def block(rows, out=None):
        if out is None:
            out = np.empty((rows.shape[0], xt.shape[0]), dtype=np.float32)
        labels = np.ascontiguousarray(groups[rows])
        _label_yuen(labels, values, by_value, n0, n1, g0, g1, equal_var, out)
        return out

    return block


def _weighted(w, x):
    out = np.empty((w.shape[0], x.shape[1]))
    _weighted_sums(w, x, out)
    return out


@njit(cache=True)
def _subset_tables(grid, p0, group, low, step, tables):  # pragma: no cover - numba
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


@njit(cache=True)
def _row_sum(tables, codes, sums):  # pragma: no cover - numba
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


@njit(parallel=True, cache=True, error_model="numpy")
def _signflip_t(codes, grid, n_ss, factor, group, tile_size, out):  # pragma: no cover - numba
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


@njit(parallel=True, cache=True, error_model="numpy")
def _label_t(codes, grid_x, grid_q, total_x, total_q, unit_x, unit_q, n0, n1, equal_var, group, tile_size,
             out):  # pragma: no cover - numba
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


@njit(parallel=True, cache=True, error_model="numpy")
def _weighted_sums(w, x, out):  # pragma: no cover - numba
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


@njit(parallel=True, cache=True, error_model="numpy")
def _condition_sums(perm, x, out):  # pragma: no cover - numba
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


@njit(cache=True)
def _trimmed_stats(buf, g):  # pragma: no cover - numba
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


@njit(parallel=True, cache=True, error_model="numpy")
def _signflip_yuen(signs, values, by_size, g, scale, out):  # pragma: no cover - numba
    """out[r, p] = one-sample trimmed t of point p's values flipped by signs[r].

    ``values[p]`` holds the point's values in ascending |value| order and
    ``by_size[p]`` their subjects, so the flipped values come out sorted in
    two linear passes: the negative ones by descending size, then the others
    by ascending size (branch-free appends). Same sorted values, same sums,
    as sorting each flipped row.
    """
    b, n = signs.shape
    for r in prange(b):
        buf = np.empty(n)
        s = signs[r]
        for p in range(values.shape[0]):
            v_p = values[p]
            subjects = by_size[p]
            filled = 0
            for k in range(n - 1, -1, -1):
                v = s[subjects[k]] * v_p[k]
                buf[filled] = v
                filled += v < 0.0
            for k in range(n):
                v = s[subjects[k]] * v_p[k]
                buf[filled] = v
                filled += v >= 0.0
            mean_t, var_w = _trimmed_stats(buf, g)
            out[r, p] = mean_t / (np.sqrt(var_w) / scale)


@njit(parallel=True, cache=True, error_model="numpy")
def _label_yuen(labels, values, by_value, n0, n1, g0, g1, equal_var, out):  # pragma: no cover - numba
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
