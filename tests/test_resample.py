"""Permutation tables, shards, the null engine and permutation p-values."""

import math
import warnings

import numba
import numpy as np
import pytest
from scipy import stats as sps

from famwise.errors import FamwiseWarning, UserError
from famwise.naive.stats import null_stats
from famwise.nulls.collectors.exceedance import ExceedanceCollector, permutation_p
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import iter_null_blocks, run_shard, run_shards
from famwise.nulls.tables import check_attainable, make_table, shard_bounds, smallest_attainable_p
from famwise.stats import compute

RNG = np.random.default_rng(4)
N = 11
X2 = RNG.standard_normal((N, 29)) + 0.4
X3 = RNG.standard_normal((N, 3, 29)) + np.array([0.0, 0.3, 0.6])[None, :, None]
GROUPS = np.array([0, 1, 0, 1, 1, 0, 1, 0, 1, 1, 0])
COVARIATE = RNG.standard_normal(N)

DESIGNS = {
    "one-sample t": dict(test="one-sample"),
    "paired yuen": dict(test="paired", statistic="yuen"),
    "two-sample student": dict(test="two-sample", groups=GROUPS),
    "two-sample welch": dict(test="two-sample", groups=GROUPS, equal_var=False),
    "two-sample yuen": dict(test="two-sample", groups=GROUPS, statistic="yuen"),
    "two-sample yuen welch": dict(test="two-sample", groups=GROUPS, statistic="yuen", equal_var=False),
    "correlation": dict(test="correlation", covariate=COVARIATE),
    "repeated-measures": dict(test="repeated-measures"),
}


def design_data(options):
    return X3 if options["test"] == "repeated-measures" else X2


def design_table(options, permutations=150, seed=11):
    return make_table(
        options["test"],
        n_subjects=N,
        permutations=permutations,
        seed=seed,
        groups=options.get("groups"),
        n_conditions=3 if options["test"] == "repeated-measures" else None,
    )


# --- tables -------------------------------------------------------------------------


@pytest.mark.parametrize("n, rows", [(5, 32), (8, 256), (10, 1024)])
def test_sign_flip_exact_enumeration(n, rows):
    table = make_table("one-sample", n_subjects=n, permutations=5000, seed=0)
    # 2^n sign vectors, identity included (common practice; Nichols & Holmes 2002)
    assert table.exact and table.n_rows == rows == table.n_distinct
    assert table.rows.dtype == np.int8 and set(np.unique(table.rows)) == {-1, 1}
    np.testing.assert_array_equal(table.rows[0], np.ones(n))
    assert len({r.tobytes() for r in table.rows}) == rows


def test_exact_boundary_and_monte_carlo():
    # n_distinct <= permutations + 1 -> exact
    assert make_table("one-sample", n_subjects=6, permutations=63, seed=1).exact
    table = make_table("one-sample", n_subjects=6, permutations=62, seed=1)
    assert not table.exact and table.n_rows == 63
    np.testing.assert_array_equal(table.rows[0], np.ones(6))


@pytest.mark.parametrize("name", ["one-sample t", "two-sample student", "correlation", "repeated-measures"])
def test_same_seed_same_table(name):
    options = DESIGNS[name]
    a, b, c = design_table(options, seed=5), design_table(options, seed=5), design_table(options, seed=6)
    assert not a.exact
    assert a.rows.tobytes() == b.rows.tobytes()
    assert a.rows.tobytes() != c.rows.tobytes()
    identity = np.arange(3) if name == "repeated-measures" else np.arange(N)
    if name != "one-sample t":
        np.testing.assert_array_equal(a.rows[0], np.broadcast_to(identity, a.rows.shape[1:]))
        # every row is a permutation
        np.testing.assert_array_equal(np.sort(a.rows, axis=-1), np.broadcast_to(identity, a.rows.shape))
        assert a.rows.dtype == np.int32


def test_label_exact_enumeration():
    groups = np.array([1, 0, 0, 1, 0, 1, 1, 0, 1, 0])
    table = make_table("two-sample", n_subjects=10, permutations=9999, seed=0, groups=groups)
    # 5 vs 5 -> C(10, 5) = 252 relabellings (common practice; Nichols & Holmes 2002)
    assert table.exact and table.n_rows == 252
    np.testing.assert_array_equal(table.rows[0], np.arange(10))
    labels = groups[table.rows]
    assert len({r.tobytes() for r in labels}) == 252
    assert (labels.sum(axis=1) == 5).all()


def test_within_subject_and_covariate_exact():
    table = make_table("repeated-measures", n_subjects=3, permutations=500, seed=0, n_conditions=3)
    assert table.exact and table.n_rows == 6**3 and table.rows.shape == (216, 3, 3)
    assert len({r.tobytes() for r in table.rows}) == 216
    np.testing.assert_array_equal(table.rows[0], np.tile(np.arange(3), (3, 1)))
    table = make_table("correlation", n_subjects=5, permutations=119, seed=0)
    assert table.exact and table.n_rows == math.factorial(5)
    np.testing.assert_array_equal(table.rows[0], np.arange(5))


def test_shard_bounds():
    bounds = [shard_bounds(10, 3, k) for k in range(3)]
    assert bounds == [(0, 4), (4, 8), (8, 10)]
    assert [shard_bounds(5, 7, k) for k in range(7)][-1] == (5, 5)
    covered = np.concatenate([np.arange(*shard_bounds(1001, 7, k)) for k in range(7)])
    np.testing.assert_array_equal(covered, np.arange(1001))


# --- engine against the naive reference ------------------------------------------------


@pytest.mark.parametrize("name", list(DESIGNS))
def test_fast_path_equals_reference(name):
    options = DESIGNS[name]
    x, table = design_data(options), design_table(options, permutations=60)
    fast = np.concatenate(list(iter_null_blocks(x, table.rows, block_size=16, **options)))
    ref = null_stats(x, table.rows, **options)
    assert fast.dtype == np.float32 and fast.shape == ref.shape
    np.testing.assert_allclose(fast, ref, rtol=2e-6, atol=1e-6)
    # row 0 is the observed statistic
    np.testing.assert_allclose(fast[0], compute(x, **options).stat, rtol=2e-6, atol=1e-6)


def test_fast_path_with_ties_and_exact_table():
    x = np.array([[1.0, 2, 0], [1, -2, 0], [1, 2, 0], [2, 2, 0], [3, -1, 0], [1, 2, 0]])
    table = make_table("one-sample", n_subjects=6, permutations=100, seed=0)
    with np.errstate(all="ignore"):
        for statistic in ("t", "yuen"):
            fast = np.concatenate(list(iter_null_blocks(x, table.rows, test="one-sample", statistic=statistic)))
            ref = null_stats(x, table.rows, test="one-sample", statistic=statistic)
            np.testing.assert_allclose(fast, ref, rtol=2e-6)


# --- determinism ------------------------------------------------------------------------


def collectors_for(options):
    observed = compute(design_data(options), **options)
    return lambda: [
        ExceedanceCollector(observed.stat, tail=observed.effective_tail),
        MaxStatCollector(tail=observed.effective_tail),
    ]


@pytest.mark.parametrize(
    "name", ["one-sample t", "paired yuen", "two-sample welch", "correlation", "repeated-measures"]
)
def test_null_identical_for_shards_and_block_sizes(name):
    options = DESIGNS[name]
    x, table = design_data(options), design_table(options, permutations=100)
    make = collectors_for(options)
    base = run_shards(x, table, n_shards=1, make_collectors=make, block_size=64, **options)
    assert base["maxstat.max"].shape == (table.n_rows,)
    for n_shards, block_size in [(7, 1), (7, 7), (1, 7), (3, 64)]:
        other = run_shards(x, table, n_shards=n_shards, make_collectors=make, block_size=block_size, **options)
        for key in base:
            assert base[key].tobytes() == other[key].tobytes(), (key, n_shards, block_size)


@pytest.mark.parametrize("name", ["one-sample t", "two-sample yuen", "repeated-measures"])
def test_null_identical_for_thread_counts(name):
    options = DESIGNS[name]
    x, table = design_data(options), design_table(options, permutations=40)
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
    finally:
        numba.set_num_threads(threads)
    assert one.tobytes() == two.tobytes()


# --- exact p-values ------------------------------------------------------------------------


def exact_p(x, options, tail):
    n_conditions = x.shape[1] if options["test"] == "repeated-measures" else None
    table = make_table(
        options["test"],
        n_subjects=x.shape[0],
        permutations=10**6,
        seed=0,
        groups=options.get("groups"),
        n_conditions=n_conditions,
    )
    assert table.exact
    observed = compute(x, tail=tail, **options)
    arrays = run_shard(
        x, table.rows, collectors=[ExceedanceCollector(observed.stat, tail=observed.effective_tail)], **options
    )
    return permutation_p(arrays["exceed.count"], table.n_rows), table


def test_exact_sign_flip_t():
    x = np.array([1.9, -0.4, 2.3, 0.8, 1.1, -0.2, 1.6, 0.7])[:, None]
    p, table = exact_p(x, dict(test="one-sample"), "two-sided")
    # 8 of 256 flips reach |t_obs| = 2.885216 -> p = 0.03125 (scipy.stats.permutation_test with a t statistic, all flips)
    assert table.n_rows == 256
    assert p[0] == 8 / 256
    assert compute(x, test="one-sample").stat[0] == pytest.approx(2.885216, rel=1e-6)


def test_all_positive_sample():
    # an all-positive sample gives exactly 2 / 2^n two-sided, 1 / 2^n greater
    # (scipy.stats.permutation_test with permutation_type='samples'; Nichols & Holmes 2002)
    x = np.arange(1.0, 11.0)[:, None]
    p, table = exact_p(x, dict(test="one-sample"), "two-sided")
    assert p[0] == 2 / 1024 == smallest_attainable_p(table, tail="two-sided")
    p, _ = exact_p(x[:5], dict(test="one-sample"), "greater")
    assert p[0] == 0.03125
    p, _ = exact_p(x[:5], dict(test="one-sample"), "two-sided")
    assert p[0] == 0.0625


def paired_t(u, v):
    return sps.ttest_1samp(u - v, 0.0).statistic


def paired_trimmed_t(u, v):
    # scipy.stats.trim_mean / scipy.stats.mstats.trimmed_stde: the one-sample trimmed t (Tukey & McLaughlin 1963)
    d = u - v
    return sps.trim_mean(d, 0.2) / float(sps.mstats.trimmed_stde(d, limits=(0.2, 0.2)))


@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
@pytest.mark.parametrize("statistic, function", [("t", paired_t), ("yuen", paired_trimmed_t)])
def test_exact_paired_equals_scipy_permutation_test(tail, statistic, function):
    rng = np.random.default_rng(7)
    a = rng.standard_normal((8, 2)) + 0.5
    b = rng.standard_normal((8, 2))
    p, _ = exact_p(a - b, dict(test="paired", statistic=statistic), tail)
    for point in range(2):
        # scipy.stats.permutation_test, permutation_type='samples', all 2^8 resamples
        ref = sps.permutation_test(
            (a[:, point], b[:, point]),
            function,
            permutation_type="samples",
            n_resamples=np.inf,
            alternative=tail,
            vectorized=False,
        )
        assert p[point] == pytest.approx(ref.pvalue, rel=1e-12), point


@pytest.mark.parametrize("equal_var", [True, False])
@pytest.mark.parametrize("tail", ["two-sided", "greater"])
def test_exact_two_sample_equals_scipy_permutation_test(equal_var, tail):
    rng = np.random.default_rng(8)
    groups = np.array([0, 1, 1, 0, 1, 0, 0, 1, 0, 1])  # 5 vs 5: symmetric null
    x = rng.standard_normal((10, 3)) + 0.8 * (groups == 0)[:, None]
    p, table = exact_p(x, dict(test="two-sample", groups=groups, equal_var=equal_var), tail)
    assert table.n_rows == 252
    for point in range(3):
        # scipy.stats.permutation_test, permutation_type='independent', all C(10, 5) relabellings
        ref = sps.permutation_test(
            (x[groups == 0, point], x[groups == 1, point]),
            lambda u, v, axis=-1: sps.ttest_ind(u, v, axis=axis, equal_var=equal_var).statistic,
            permutation_type="independent",
            n_resamples=np.inf,
            alternative=tail,
            vectorized=True,
        )
        assert p[point] == pytest.approx(ref.pvalue, rel=1e-12)


def test_exact_correlation_equals_scipy_permutation_test():
    rng = np.random.default_rng(9)
    covariate = rng.standard_normal(6)
    x = rng.standard_normal((6, 3)) + covariate[:, None]
    p, table = exact_p(x, dict(test="correlation", covariate=covariate), "greater")
    assert table.n_rows == 720
    for point in range(3):
        # scipy.stats.permutation_test, permutation_type='pairings', all 6! orders
        ref = sps.permutation_test(
            (covariate,),
            lambda u, column=x[:, point]: sps.pearsonr(u, column).statistic,
            permutation_type="pairings",
            n_resamples=np.inf,
            alternative="greater",
            vectorized=False,
        )
        assert p[point] == pytest.approx(ref.pvalue, rel=1e-12)


def test_exact_repeated_measures_by_enumeration():
    x = np.random.default_rng(10).standard_normal((4, 3, 5))
    p, table = exact_p(x, dict(test="repeated-measures"), "two-sided")
    # by hand: all (3!)^4 within-subject orders recomputed one at a time (common practice, no source)
    ref = null_stats(x, table.rows, test="repeated-measures")
    expected = (ref >= ref[0] * (1 - 1e-12)).mean(axis=0)
    np.testing.assert_array_equal(p, expected)
    assert p.min() >= smallest_attainable_p(table, tail="two-sided") == 6 / 1296


# --- collectors and p-values ------------------------------------------------------------------


def test_exceedance_collector_tails():
    observed = np.array([2.0, -2.0, np.nan])
    block = np.array([[2.0, -2.0, 1.0], [-3.0, 1.0, 0.0], [1.0, -2.5, 5.0]], dtype=np.float32)
    counts = {}
    for tail in ("two-sided", "greater", "less"):
        collector = ExceedanceCollector(observed, tail=tail)
        collector.update(block[:2])
        collector.update(block[2:])
        counts[tail] = collector.arrays()["exceed.count"]
    np.testing.assert_array_equal(counts["two-sided"], [2, 2, 3])
    np.testing.assert_array_equal(counts["greater"], [1, 2, 3])
    np.testing.assert_array_equal(counts["less"], [3, 2, 3])


@pytest.mark.parametrize("b, m, expected", [(0, 999, 0.001), (24, 999, 0.025), (49, 999, 0.05), (0, 9999, 1e-4)])
def test_permutation_p_phipson_smyth(b, m, expected):
    # Phipson & Smyth (2010): p = (b + 1) / (m + 1); our counts include the identity row
    assert permutation_p(np.array([b + 1]), m + 1)[0] == pytest.approx(expected, rel=1e-12)


def test_smallest_attainable_p():
    # common practice (Nichols & Holmes 2002): n = 5 sign flips -> 0.0625 two-sided, 0.03125 one-sided; 5 vs 5 -> 2/252 and 1/252
    table = make_table("one-sample", n_subjects=5, permutations=1000, seed=0)
    assert smallest_attainable_p(table, tail="two-sided") == 0.0625
    assert smallest_attainable_p(table, tail="less") == 0.03125
    groups = np.r_[np.zeros(5, int), np.ones(5, int)]
    table = make_table("two-sample", n_subjects=10, permutations=1000, seed=0, groups=groups)
    assert smallest_attainable_p(table, tail="two-sided") == pytest.approx(2 / 252)
    assert smallest_attainable_p(table, tail="greater") == pytest.approx(1 / 252)
    table = make_table("one-sample", n_subjects=30, permutations=999, seed=0)
    assert smallest_attainable_p(table, tail="two-sided") == 0.001


def test_check_attainable_warns_with_the_p():
    table = make_table("one-sample", n_subjects=5, permutations=1000, seed=0)
    with pytest.warns(
        FamwiseWarning, match=r"smallest attainable two-sided permutation p is 0.0625 .* above alpha 0.05"
    ):
        check_attainable(table, tail="two-sided", alpha=0.05)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_attainable(table, tail="greater", alpha=0.05)


def test_bad_inputs():
    with pytest.raises(UserError, match=r"`permutations` must be a whole number of at least 1, got 0"):
        make_table("one-sample", n_subjects=10, permutations=0, seed=0)
    with pytest.raises(UserError, match=r"`seed` must be a whole number of at least 0, got -1"):
        make_table("one-sample", n_subjects=10, permutations=10, seed=-1)
    with pytest.raises(UserError, match=r"the paired test needs at least 3 subjects, got 2"):
        make_table("paired", n_subjects=2, permutations=10, seed=0)
    with pytest.raises(UserError, match=r"group 0 has none"):
        make_table("two-sample", n_subjects=6, permutations=10, seed=0, groups=np.ones(6, int))
    with pytest.raises(UserError, match=r"group 1 has 2 subjects; the two-sample test needs at least 3 per group"):
        make_table("two-sample", n_subjects=6, permutations=10, seed=0, groups=[0, 0, 0, 0, 1, 1])
    with pytest.raises(UserError, match=r"needs at least 3 conditions, got 2"):
        make_table("repeated-measures", n_subjects=6, permutations=10, seed=0, n_conditions=2)
    with pytest.raises(UserError, match=r"`test` must be one of .*got 'ttest'"):
        make_table("ttest", n_subjects=6, permutations=10, seed=0)
    with pytest.raises(UserError, match=r"shard index must be between 0 and 2, got 3"):
        shard_bounds(10, 3, 3)
    with pytest.raises(UserError, match=r"`block_size` must be at least 1, got 0"):
        next(iter_null_blocks(X2, np.ones((2, N), np.int8), test="one-sample", block_size=0))
    with pytest.raises(UserError, match=r"`tail` must be one of .*got 'up'"):
        ExceedanceCollector(np.zeros(3), tail="up")


@pytest.mark.parametrize("scale", [1e-12, 1e12])
def test_sign_flip_t_scale_free(scale):
    # t does not depend on the unit of the data (common practice, no source)
    table = make_table("one-sample", n_subjects=N, permutations=30, seed=2)
    base = np.concatenate(list(iter_null_blocks(X2, table.rows, test="one-sample")))
    scaled = np.concatenate(list(iter_null_blocks(X2 * scale, table.rows, test="one-sample")))
    np.testing.assert_allclose(base, scaled, rtol=1e-6)


def test_integer_grid_makes_flip_sums_exact():
    from famwise.nulls.engine import integer_grid

    x = np.random.default_rng(3).standard_normal((24, 50)) * np.logspace(-30, 30, 50)
    grid = integer_grid(x)
    assert (grid == np.rint(grid)).all()
    assert 24 * np.abs(grid).max() <= 2.0**52
    signs = np.random.default_rng(4).choice([-1.0, 1.0], size=(5, 24))
    # exact integer sums do not depend on the order of the subjects
    order = np.random.default_rng(5).permutation(24)
    np.testing.assert_array_equal(signs @ grid, signs[:, order] @ grid[order])


@pytest.mark.parametrize("name", ["one-sample t", "paired yuen", "two-sample yuen", "correlation"])
def test_reused_output_buffer_gives_the_same_blocks(name):
    options = DESIGNS[name]
    x, table = design_data(options), design_table(options, permutations=40)
    fresh = np.concatenate(list(iter_null_blocks(x, table.rows, block_size=16, **options)))
    reused = np.concatenate(
        [b.copy() for b in iter_null_blocks(x, table.rows, block_size=16, reuse_output=True, **options)]
    )
    assert fresh.tobytes() == reused.tobytes()


@pytest.mark.parametrize("name", ["one-sample t", "two-sample student", "two-sample welch"])
def test_point_tiles_and_subject_groups_do_not_change_the_null(monkeypatch, name):
    # exact integer sums: any tiling of the points and any grouping of the subjects gives the same bits
    import famwise.nulls.engine as engine

    options = DESIGNS[name]
    table = design_table(options, permutations=50)
    whole = np.concatenate(list(iter_null_blocks(X2, table.rows, block_size=7, **options)))
    monkeypatch.setattr(engine, "_TILE", 5)
    chunked = np.concatenate(list(iter_null_blocks(X2, table.rows, block_size=7, **options)))
    assert whole.tobytes() == chunked.tobytes()
    monkeypatch.setattr(engine, "_GROUP", 3)
    regrouped = np.concatenate(list(iter_null_blocks(X2, table.rows, block_size=7, **options)))
    assert whole.tobytes() == regrouped.tobytes()


@pytest.mark.parametrize("n", [3, 5, 8, 13, 30])
def test_subset_sum_t_equals_the_product_formula_bit_for_bit(monkeypatch, n):
    # The sign-flip kernel's table sums against t computed here from signs @ grid (exact integers) with
    # the kernel's float32 arithmetic; grouping subjects by 3 instead of 4 changes nothing (common practice, no source)
    import famwise.nulls.engine as engine

    rng = np.random.default_rng(n)
    x = rng.standard_normal((n, 2500)) * np.exp(rng.standard_normal(2500))
    signs = rng.choice(np.array([-1, 1], dtype=np.int8), size=(17, n))
    grid = engine.integer_grid(x)
    sums = signs.astype(np.float64) @ grid
    sum_of_squares = np.zeros(grid.shape[1])
    for row in grid:  # in subject order, as the kernel's caller does
        sum_of_squares += row * row
    d = np.maximum(n * sum_of_squares - sums * sums, 0.0)
    expected = (sums * np.sqrt(n - 1.0)).astype(np.float32) / np.sqrt(d.astype(np.float32))
    got = engine.block_function(x, test="one-sample")(signs)
    assert got.tobytes() == expected.tobytes()
    monkeypatch.setattr(engine, "_GROUP", 3)
    assert engine.block_function(x, test="one-sample")(signs).tobytes() == expected.tobytes()
