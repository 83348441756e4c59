"""Max-statistic inference: collectors, single step, Westfall-Young step-down, all-contrasts families."""

import numpy as np
import pytest

from famwise.correct.maxstat import single_step, single_step_family, step_down, step_down_family
from famwise.errors import UserError
from famwise.naive.stepdown import step_down_reference
from famwise.nulls.collectors.maxima import MaxStatCollector, StepDownCollector
from famwise.nulls.collectors.protocol import merge_shard_arrays

TAILS = ["two-sided", "greater", "less"]
TRANSFORM = {"two-sided": np.abs, "greater": lambda x: x, "less": np.negative}


def _tied_table(seed, n_rows=40, n_points=15):
    """Integer-valued statistic maps (many ties); row 0 is the identity, i.e. the observed map."""
    rng = np.random.default_rng(seed)
    table = rng.integers(-4, 5, size=(n_rows, n_points)).astype(float)
    table[0, :3] += 3  # a few strong observed points
    return table


def _collect(collector_factory, table, pieces):
    """Feed ``table`` to one collector per shard (rows split into ``pieces``) and merge their arrays."""
    shards = []
    for rows in np.array_split(np.arange(table.shape[0]), pieces):
        collector = collector_factory()
        for block in np.array_split(rows, 2):  # two blocks per shard
            collector.update(table[block])
        shards.append(collector.arrays())
    return merge_shard_arrays(shards)


def _literal_step_down(null, observed, tail):
    """Westfall & Young (1993) step-down straight from its definition (O(points^2) maxima).

    p_j = #{rows: max over points ranked j or lower of the null >= observed_j} / n_rows, then a cumulative
    maximum in rank order. Ranks: descending transformed observed statistic, ties in index order.
    """
    null, observed = TRANSFORM[tail](null), TRANSFORM[tail](observed)
    order = np.argsort(-observed, kind="stable")
    raw = [np.mean(null[:, order[j:]].max(axis=1) >= observed[order[j]]) for j in range(order.size)]
    adjusted = np.empty(order.size)
    adjusted[order] = np.maximum.accumulate(raw)
    return adjusted


@pytest.mark.parametrize("tail", TAILS)
def test_max_collector(tail):
    table = np.random.default_rng(1).standard_normal((30, 50))
    merged = _collect(lambda: MaxStatCollector(tail=tail), table, pieces=3)
    np.testing.assert_array_equal(merged["maxstat.max"], TRANSFORM[tail](table).max(axis=1))
    assert merged["maxstat.max"].dtype == np.float64


@pytest.mark.parametrize("tail", TAILS)
@pytest.mark.parametrize("seed", range(6))
def test_step_down_equals_brute_force_with_ties(tail, seed):
    # Source: Westfall & Young (1993), successive maxima, written out twice: in famwise.naive.stepdown
    # (point by point) and in this test (from the definition).
    table = _tied_table(seed)
    observed = table[0]
    merged = _collect(lambda: StepDownCollector(observed, tail=tail), table, pieces=1)
    result = step_down(observed, merged["stepdown.count"], table.shape[0], tail=tail, alpha=0.1)
    reference = step_down_reference(table, observed, tail=tail)
    np.testing.assert_array_equal(result.p_corrected, reference)
    np.testing.assert_allclose(reference, _literal_step_down(table, observed, tail), rtol=1e-15)
    np.testing.assert_array_equal(result.mask, reference <= 0.1)


@pytest.mark.parametrize("tail", TAILS)
def test_shard_split_gives_identical_results(tail):
    table = np.random.default_rng(2).standard_normal((61, 40))
    table[0, 5] = 4.0
    observed = table[0]
    results = []
    for pieces in (1, 3):
        maxima = _collect(lambda: MaxStatCollector(tail=tail), table, pieces)["maxstat.max"]
        counts = _collect(lambda: StepDownCollector(observed, tail=tail), table, pieces)["stepdown.count"]
        results.append((single_step(observed, maxima, tail=tail), step_down(observed, counts, 61, tail=tail)))
    for one, three in zip(results[0], results[1]):
        np.testing.assert_array_equal(one.p_corrected, three.p_corrected)
        np.testing.assert_array_equal(one.mask, three.mask)
        assert one.threshold == three.threshold


def test_step_down_counts_do_not_depend_on_block_size():
    table = _tied_table(9, n_rows=37, n_points=500)
    observed = table[0]
    expected = _collect(lambda: StepDownCollector(observed, tail="two-sided"), table, pieces=1)["stepdown.count"]
    for rows_per_block in (1, 37):
        collector = StepDownCollector(observed, tail="two-sided")
        for start in range(0, 37, rows_per_block):
            collector.update(table[start : start + rows_per_block])
        np.testing.assert_array_equal(collector.arrays()["stepdown.count"], expected)


@pytest.mark.parametrize("tail", TAILS)
@pytest.mark.parametrize("seed", range(4))
def test_step_down_never_above_single_step_and_both_monotone(tail, seed):
    rng = np.random.default_rng(seed)
    table = rng.standard_normal((200, 300))
    table[:, :30] += rng.choice([-1.0, 1.0], size=(200, 1)) * 2.0  # sign-flip-like effect: symmetric null rows
    table[0, :30] = 3.0 + rng.uniform(size=30)
    table = np.round(table, 1)  # ties
    observed = table[0]
    maxima = _collect(lambda: MaxStatCollector(tail=tail), table, 1)["maxstat.max"]
    counts = _collect(lambda: StepDownCollector(observed, tail=tail), table, 1)["stepdown.count"]
    single = single_step(observed, maxima, tail=tail, alpha=0.05)
    stepped = step_down(observed, counts, 200, tail=tail, alpha=0.05, max_null=maxima)
    assert np.all(stepped.p_corrected <= single.p_corrected)
    assert stepped.n_significant >= single.n_significant
    order = np.argsort(-TRANSFORM[tail](observed), kind="stable")
    for result in (single, stepped):
        assert np.all(np.diff(result.p_corrected[order]) >= 0)
        # Equal statistics get equal adjusted p.
        stat = TRANSFORM[tail](observed)
        for value in np.unique(stat):
            assert np.ptp(result.p_corrected[stat == value]) == 0
    # The most significant point gets the same p from both: the same maximum over all points.
    top = order[0]
    assert stepped.p_corrected[top] == single.p_corrected[top]
    np.testing.assert_array_equal(stepped.null, maxima)


def test_single_step_p_and_threshold_by_hand():
    # p = #{null >= observed} / n_rows with the identity among the rows (DESIGN conventions).
    max_null = np.arange(1.0, 21.0)  # 20 rows; the identity's maximum is 20
    observed = np.array([[20.0, -19.0, 18.5], [18.0, 0.0, -20.0]])
    result = single_step(observed, max_null, tail="two-sided", alpha=0.1)
    np.testing.assert_allclose(result.p_corrected, [[1 / 20, 2 / 20, 2 / 20], [3 / 20, 1.0, 1 / 20]])
    np.testing.assert_array_equal(result.mask, [[True, True, True], [False, False, True]])
    # Smallest null maximum a point can reach and be significant at 0.1: 19 (2 of 20 rows >= 19).
    assert result.threshold == 19.0 and result.threshold_kind == "stat"
    assert result.settings == {"alpha": 0.1, "m": 6, "tail": "two-sided", "n_rows": 20}
    assert result.p_corrected.shape == (2, 3)
    # One-sided: "less" works on -stat.
    less = single_step(observed, max_null, tail="less", alpha=0.1)
    np.testing.assert_allclose(less.p_corrected, [[1.0, 2 / 20, 1.0], [1.0, 1.0, 1 / 20]])


def test_single_step_threshold_none_when_unattainable():
    # 10 rows: the smallest attainable p is 0.1 > 0.05.
    result = single_step(np.array([5.0, 1.0]), np.arange(10.0), tail="greater", alpha=0.05)
    assert result.threshold is None and result.n_significant == 0


def test_single_step_points_at_threshold_are_significant():
    rng = np.random.default_rng(11)
    max_null = np.round(np.abs(rng.standard_normal(500)) + 2, 2)
    observed = np.round(rng.uniform(0, 5, size=2000), 2)
    result = single_step(observed, max_null, tail="greater", alpha=0.05)
    assert np.all(result.mask[observed >= result.threshold])
    assert np.all(~result.mask[observed <= max_null[max_null < result.threshold].max()])


def test_step_down_threshold_is_smallest_significant_stat():
    table = _tied_table(3, n_rows=100, n_points=30)
    table[0, :5] = [9.0, -8.0, 7.5, 7.0, 6.0]
    counts = _collect(lambda: StepDownCollector(table[0], tail="two-sided"), table, 1)["stepdown.count"]
    result = step_down(table[0], counts, 100, tail="two-sided", alpha=0.05)
    assert result.n_significant > 0
    assert result.threshold == np.abs(table[0][result.mask]).min()
    assert result.method == "max-stat-step-down" and result.threshold_kind == "stat"


def test_single_step_family_uses_max_over_contrasts():
    rng = np.random.default_rng(4)
    tables = [rng.standard_normal((100, 20)), rng.standard_normal((100, 35))]
    observed = [tables[0][0].reshape(4, 5), tables[1][0]]
    nulls = [np.abs(t).max(axis=1) for t in tables]
    results = single_step_family(observed, nulls, tail="two-sided", alpha=0.05)
    # The same as one collector fed the blocks of both contrasts concatenated along the point axis.
    joint = _collect(lambda: MaxStatCollector(tail="two-sided"), np.concatenate(tables, axis=1), 2)["maxstat.max"]
    np.testing.assert_array_equal(results[0].null, joint)
    for result, obs in zip(results, observed):
        np.testing.assert_array_equal(result.p_corrected, single_step(obs, joint, tail="two-sided").p_corrected)
        assert result.p_corrected.shape == obs.shape
        assert result.settings["m"] == 55 and result.settings["contrasts"] == 2


@pytest.mark.parametrize("tail", TAILS)
def test_step_down_family_ranks_all_contrasts_jointly(tail):
    tables = [_tied_table(5, n_rows=50, n_points=12), _tied_table(6, n_rows=50, n_points=8)]
    joint_table = np.concatenate(tables, axis=1)
    observed = [tables[0][0].reshape(3, 4), tables[1][0]]
    collector_counts = _collect(
        lambda: StepDownCollector(np.concatenate([o.ravel() for o in observed]), tail=tail), joint_table, 2
    )["stepdown.count"]
    results = step_down_family(observed, collector_counts, 50, tail=tail, alpha=0.1)
    expected = step_down_reference(joint_table, joint_table[0], tail=tail)
    np.testing.assert_array_equal(results[0].p_corrected, expected[:12].reshape(3, 4))
    np.testing.assert_array_equal(results[1].p_corrected, expected[12:])
    assert all(r.settings["m"] == 20 and r.settings["contrasts"] == 2 for r in results)


def test_maxt_critical_value_for_100_independent_gaussians():
    # Sidak (1967) gives the 95th percentile of max|Z| over m = 100 independent N(0, 1)
    # as 3.473979; Monte Carlo with 200,000 draws, tolerance 0.02.
    rng = np.random.default_rng(2010)
    collector = MaxStatCollector(tail="two-sided")
    for _ in range(20):
        collector.update(rng.standard_normal((10_000, 100)))
    max_null = collector.arrays()["maxstat.max"]
    result = single_step(np.zeros(100), max_null, tail="two-sided", alpha=0.05)
    assert result.threshold == pytest.approx(3.473979, abs=0.02)


@pytest.mark.parametrize(
    ("call", "error", "message"),
    [
        (lambda: MaxStatCollector(tail="both"), UserError, r"tail must be one of two-sided, greater, less; got 'both'"),
        (
            lambda: StepDownCollector(np.array([1.0, np.nan, np.inf]), tail="greater"),
            UserError,
            r"observed statistic must be finite at every tested point; found 2 NaN/inf of 3 points",
        ),
        (lambda: single_step(np.array([]), np.ones(5), tail="greater"), UserError, r"got an empty family"),
        (lambda: single_step(np.ones(3), np.ones(5), tail="greater", alpha=2), UserError, r"alpha must be .*got 2"),
        (
            lambda: single_step(np.ones(3), np.array([1.0, np.nan]), tail="greater"),
            ValueError,
            r"max null contains NaN",
        ),
        (lambda: single_step(np.ones(3), np.ones((2, 2)), tail="greater"), ValueError, r"non-empty 1-D array"),
        (lambda: step_down(np.ones(3), np.ones(4, int), 5, tail="less"), ValueError, r"counts must have shape \(3,\)"),
        (lambda: step_down(np.ones(3), np.full(3, 6), 5, tail="less"), ValueError, r"lie in \[0, n_rows = 5\]"),
        (lambda: step_down(np.ones(3), np.ones(3, int), 0, tail="less"), ValueError, r"n_rows must be a positive"),
        (
            lambda: step_down(np.array([3.0, 1.0]), np.array([0, 4]), 5, tail="greater"),
            ValueError,
            r"p of 0 at 1 points: the null must include the identity row \(row 0",
        ),
        (
            lambda: single_step(np.array([3.0, 1.0]), np.array([2.9, 1.0]), tail="greater"),
            ValueError,
            r"p of 0 at 1 points: the null must include the identity row",
        ),
        (
            lambda: StepDownCollector(np.ones(3), tail="less").update(np.ones((2, 4))),
            ValueError,
            r"statistic block must have shape \(n_rows, 3\); got \(2, 4\)",
        ),
        (
            lambda: single_step_family([np.ones(3)], [np.ones(5), np.ones(5)], tail="less"),
            ValueError,
            r"one max null per contrast; got 1 contrasts and 2 nulls",
        ),
        (
            lambda: single_step_family([np.ones(3), np.ones(2)], [np.ones(5), np.ones(4)], tail="less"),
            ValueError,
            r"differ in length: \[5, 4\]",
        ),
    ],
)
def test_bad_input(call, error, message):
    with pytest.raises(error, match=message):
        call()


@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
def test_collector_maxima_of_float32_blocks_equal_numpy(tail):
    # numpy.max of |x|, x or -x per row (NaN propagates), the reference for the one-pass float32 path
    rng = np.random.default_rng(8)
    block = rng.standard_normal((5, 1000)).astype(np.float32)
    block[1, 7], block[2, 3], block[3, 9] = np.nan, -np.inf, np.float32(-7.5)
    collector = MaxStatCollector(tail=tail)
    collector.update(block)
    transformed = {"two-sided": np.abs(block), "greater": block, "less": -block}[tail]
    np.testing.assert_array_equal(collector.arrays()["maxstat.max"], transformed.max(axis=1).astype(np.float64))
