"""The block engine: statistic maps of permutation-table rows, block by block, into the collectors.

`iter_null_blocks` gives, for a block of permutation-table rows, the
statistic map of each row, float32 (b, P); `run_shard` hands every block to
every collector. Each row's value at each point is computed by the same
operations in the same order whatever the block it comes in, the block
size, the number of blocks or the number of threads, so the null is
bit-identical for any sharding. Sums over subjects run in subject order
(numba kernels in `famwise.kernels.resampled_stats`), or are exact on an
integer grid (the t statistics), so that no summation order can change a
bit.

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
- labels of three or more groups (between-groups F): group sums of the
  grand-mean-centred data (`famwise.nulls.between_block`).
- covariate (correlation): r is the permuted standardised covariate weighted
  sum of the standardised data.
- Freedman-Lane (regression): weighted sums of the reduced model's residuals
  with permuted orthonormal vectors (`famwise.nulls.freedman_lane`).
- Yuen (sign flips and labels): no matrix-product form, because trimming
  depends on the order of the flipped or relabelled values. Sign flips: the
  values are sorted by size once per point, after which every flipped row
  comes out sorted in O(n). Labels: the values are sorted once per point and
  dealt to the two groups of each row in O(n).
"""

from collections.abc import Callable, Iterator
from math import sqrt

import numpy as np

from famwise.errors import UserError
from famwise.kernels.resampled_stats import (
    _condition_sums,
    _label_t,
    _label_yuen,
    _signflip_t,
    _signflip_yuen,
    _weighted_sums,
)
from famwise.nulls.between_block import between_f_block
from famwise.nulls.collectors.protocol import NullCollector, merge_shard_arrays
from famwise.nulls.freedman_lane import freedman_lane_block
from famwise.nulls.tables import PermutationTable, shard_bounds
from famwise.stats import SIGN_FLIP_TESTS, check_design
from famwise.stats.regression import check_regression
from famwise.stats.trimmed import n_trimmed

_GROUP = 4  # subjects per subset-sum table (16 entries)
_TILE = 1024  # points per tile of the t kernels: their subset-sum tables stay in cache

BlockFunction = Callable[[np.ndarray], np.ndarray]


def block_function(
    x, *, test, groups=None, covariate=None, statistic="t", trim=0.2, equal_var=True, nuisance=None
) -> BlockFunction:
    """Prepare the data once; return f(rows_block, out=None) -> float32 (b, P).

    The t and Yuen paths write into ``out`` (float32, C-contiguous, shape
    (b, P)) when it is given, to spare a new allocation per block; the F and
    correlation paths return a new array.

    Parameters
    ----------
    x : ndarray of float64, (n, P) or (n, k, P)
        Checked data (see `famwise.stats.check_design`).
    test, groups, covariate, statistic, trim, equal_var, nuisance
        As in `famwise.stats.compute` (``nuisance`` checked: float64 (n, q)).

    Returns
    -------
    callable
        Takes rows of the permutation table: int8 signs (b, n) for one-sample,
        paired and weighted, int subject permutations (b, n) for two-sample,
        between-groups, correlation and regression, int within-subject condition permutations (b, n, k) for
        repeated measures. Row semantics: flipped data s_i x_i; subject i gets
        the label ``groups[row[i]]``, the covariate ``covariate[row[i]]`` or
        the reduced model's residual of subject ``row[i]``;
        subject i's condition j takes the data of its condition ``row[i, j]``.
    """
    if test in SIGN_FLIP_TESTS:
        return _signflip_yuen_block(x, trim) if statistic == "yuen" else _signflip_t_block(x)
    if test == "between-groups":
        return between_f_block(x, groups)
    if test == "two-sample":
        if statistic == "yuen":
            return _label_yuen_block(x, groups, trim, equal_var)
        return _label_t_block(x, groups, equal_var)
    if test == "repeated-measures":
        return _within_f_block(x)
    if test == "regression":
        return freedman_lane_block(x, covariate, nuisance)
    return _covariate_block(x, covariate)


def iter_null_blocks(
    x,
    rows,
    *,
    test,
    groups=None,
    covariate=None,
    statistic="t",
    trim=0.2,
    equal_var=True,
    block_size=64,
    reuse_output=False,
    nuisance=None,
) -> Iterator[np.ndarray]:
    """Statistic maps of table rows, block by block, rows in order.

    Parameters
    ----------
    x : array_like, (n, P) or (n, k, P)
        The data of `famwise.stats.compute`.
    rows : ndarray
        A row range of `PermutationTable.rows`.
    test, groups, covariate, statistic, trim, equal_var, nuisance
        As in `famwise.stats.compute`.
    block_size : int
        Rows per block; memory is O(block_size * P). The values do not depend
        on it.
    reuse_output : bool
        When True, blocks may be written into one buffer that the next block
        overwrites (no page faults for a fresh array per block): the
        consumer must use each block before asking for the next, as
        `run_shard`'s collectors do.

    Yields
    ------
    ndarray of float32, shape (b, P)
        The statistic of each row of the block (b <= block_size).
    """
    x, groups, covariate = check_design(
        x, test=test, groups=groups, covariate=covariate, statistic=statistic, trim=trim, nuisance=nuisance
    )
    if test == "regression":
        nuisance = check_regression(covariate, nuisance, x.shape[0])[1]
    rows = _check_rows(rows, test, x.shape)
    if block_size < 1:
        raise UserError(f"`block_size` must be at least 1, got {block_size}")
    block = block_function(
        x,
        test=test,
        groups=groups,
        covariate=covariate,
        statistic=statistic,
        trim=trim,
        equal_var=equal_var,
        nuisance=nuisance,
    )
    buffer = np.empty((min(block_size, rows.shape[0]), x.shape[-1]), dtype=np.float32) if reuse_output else None
    for start in range(0, rows.shape[0], block_size):
        part = rows[start : start + block_size]
        yield block(part, None if buffer is None else buffer[: part.shape[0]])


def run_shard(
    x, rows, *, collectors: list[NullCollector], block_size=64, screen=None, **statistic_options
) -> dict[str, np.ndarray]:
    """Feed every block of a shard's rows to every collector.

    Parameters
    ----------
    x : array_like
        The data, as in `iter_null_blocks`.
    rows : ndarray
        The shard's rows of the permutation table.
    collectors : list of NullCollector
    block_size : int
    screen : callable or None
        Applied to each block before the collectors: a
        `famwise.nulls.screen.BlockScreen` (left-out points, non-finite values).
    **statistic_options
        ``test`` and the other options of `iter_null_blocks`.

    Returns
    -------
    dict of str to ndarray
        Every collector's arrays (keys must not collide), ready for
        `famwise.nulls.collectors.protocol.merge_shard_arrays`.
    """
    for stats in iter_null_blocks(x, rows, block_size=block_size, reuse_output=True, **statistic_options):
        if screen is not None:
            stats = screen(stats)
        for collector in collectors:
            collector.update(stats)
    arrays = {}
    for collector in collectors:
        for key, value in collector.arrays().items():
            if key in arrays:
                raise ValueError(f"two collectors write the key {key!r}")
            arrays[key] = value
    return arrays


def run_shards(x, table: PermutationTable, *, n_shards, make_collectors, block_size=64, **statistic_options):
    """Run a whole table as ``n_shards`` shards in turn and merge them (for tests and small runs).

    ``make_collectors()`` returns fresh collectors for each shard.
    """
    parts = []
    for k in range(n_shards):
        start, stop = shard_bounds(table.n_rows, n_shards, k)
        parts.append(
            run_shard(
                x, table.rows[start:stop], collectors=make_collectors(), block_size=block_size, **statistic_options
            )
        )
    return merge_shard_arrays(parts)


def _check_rows(rows, test, shape):
    rows = np.asarray(rows)
    n = shape[0]
    want = (n, shape[1]) if test == "repeated-measures" else (n,)
    if rows.ndim != len(want) + 1 or rows.shape[1:] != want:
        raise ValueError(f"table rows of shape {rows.shape} do not fit {test} data of shape {shape}")
    return rows


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
        _label_t(
            _subset_codes(groups[rows] == 0),
            grid_x,
            grid_q,
            total_x,
            total_q,
            1.0 / scale_x,
            1.0 / scale_q,
            n0,
            n1,
            equal_var,
            _GROUP,
            _TILE,
            out,
        )
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
