"""TFCE maps: analytic values, brute force, the naive reference, collectors."""

import itertools

import numpy as np
import pytest
from scipy import ndimage
from scipy.sparse.csgraph import connected_components

from famwise.correct.tfce import tfce_inference, tfce_map
from famwise.errors import UserError
from famwise.naive.clusters import one_sample_t, product_adjacency
from famwise.naive.tfce import tfce_null_reference, tfce_reference
from famwise.nulls.collectors.largest_tfce import TFCECollector

from conftest import ring

NO_CHANNELS = dict(indptr=np.array([0, 0], np.int32), indices=np.zeros(0, np.int32))
BUMP = np.array([0, 0, 2, 2, 2, 2, 0, 0], dtype=float)[None, None, :]


def brute_tfce(stat, graph, E=0.5, H=2.0, signs=(1, -1)):
    """Exact TFCE by labeling at every distinct value (written here, scipy.sparse.csgraph labels).

    The extent is constant on (u_{k+1}, u_k] between consecutive distinct values,
    so the integral is sum_k e_k^E (u_k^(H+1) - u_{k+1}^(H+1)) / (H+1).
    """
    adjacency = product_adjacency(stat.shape, **graph)
    flat = stat.ravel()
    out = np.zeros(flat.size)
    for sign in signs:
        values = sign * flat
        levels = np.unique(values[values > 0])[::-1]
        for k, level in enumerate(levels):
            lower = levels[k + 1] if k + 1 < levels.size else 0.0
            selected = np.flatnonzero(values >= level)
            _, labels = connected_components(adjacency[selected][:, selected], directed=False)
            extent = np.bincount(labels)[labels].astype(float)
            out[selected] += sign * extent**E * (level ** (H + 1) - lower ** (H + 1)) / (H + 1)
    return out.reshape(stat.shape)


def test_rectangular_bump_exact():
    # Smith & Nichols (2009) definition, integrated by hand: w^E a^(H+1)/(H+1) = 2 * 8 / 3 on the bump, 0 outside
    got = tfce_map(BUMP, **NO_CHANNELS)
    assert np.allclose(got[0, 0], [0, 0, 16 / 3, 16 / 3, 16 / 3, 16 / 3, 0, 0], rtol=1e-14, atol=0)
    # same integral: E = 1, H = 2 -> 10.666667; a single point of height 1 -> 1/3
    assert np.allclose(tfce_map(BUMP, **NO_CHANNELS, E=1.0)[0, 0, 3], 32 / 3, rtol=1e-14)
    single = np.zeros((1, 1, 5))
    single[0, 0, 2] = 1.0
    assert np.isclose(tfce_map(single, **NO_CHANNELS)[0, 0, 2], 1 / 3, rtol=1e-14)
    # the negative bump is enhanced with its sign, and not at all with tail "greater"
    assert np.allclose(tfce_map(-BUMP, **NO_CHANNELS), -got)
    assert not tfce_map(-BUMP, **NO_CHANNELS, tail="greater").any()


def test_fixed_step_right_endpoint_values():
    # Smith & Nichols (2009) integral by the right-endpoint rule, summed by hand: dh = 0.1 -> 5.74, dh = 0.01 -> 5.3734, dh = 0.001 -> 5.33733
    for step, expected in [(0.1, 5.74), (0.01, 5.3734), (0.001, 5.33733)]:
        got = tfce_map(BUMP, **NO_CHANNELS, step=step)[0, 0, 2:6]
        assert np.allclose(got, expected, rtol=2e-6)


def test_fixed_step_converges_to_exact():
    # from the definition (Smith & Nichols 2009): the right-endpoint sum converges to the integral, error O(dh)
    rng = np.random.default_rng(4)
    graph = ring(5)
    stat = ndimage.gaussian_filter(rng.standard_normal((5, 4, 12)), (0, 0.7, 1.2)) * 6
    exact = tfce_map(stat, **graph)
    errors = [np.abs(tfce_map(stat, **graph, step=step) - exact).max() for step in (0.1, 0.01, 0.001)]
    assert errors[0] > errors[1] > errors[2]
    assert errors[2] < 2e-3 * np.abs(exact).max()


@pytest.mark.parametrize("seed", range(4))
def test_exact_equals_brute_force(seed):
    rng = np.random.default_rng(seed)
    graph = ring(5)
    stat = ndimage.gaussian_filter(rng.standard_normal((5, 3, 10)), (0, 0.6, 1.0)) * 4
    stat[0, 0, :3] = stat[0, 0, 4]  # ties
    stat[2, 1, 5] = 0.0
    E, H = (0.5, 2.0) if seed % 2 == 0 else (2 / 3, 1.5)
    assert np.allclose(tfce_map(stat, **graph, E=E, H=H), brute_tfce(stat, graph, E, H), rtol=1e-11, atol=0)


@pytest.mark.parametrize("dims", [("channel", "freq", "time"), ("freq", "time"), ("channel", "time")])
@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
def test_fixed_step_equals_reference(dims, tail):
    # reference: famwise.naive.tfce (scipy.sparse.csgraph labels at every level)
    rng = np.random.default_rng(7)
    graph = ring(6)
    stat = ndimage.gaussian_filter(rng.standard_normal((6, 4, 12)), (0, 0.6, 1.0)) * 5
    for step in (0.1, 0.37):
        got = tfce_map(stat, **graph, dims=dims, step=step, tail=tail)
        expected = tfce_reference(stat, **graph, dims=dims, step=step, tail=tail)
        assert np.allclose(got, expected, rtol=1e-11, atol=1e-12)


@pytest.mark.parametrize("step", [None, 0.2])
def test_collector_matches_reference_null_and_block_split(step):
    # reference: famwise.naive.tfce null (t recomputed per row); exact mode against the brute force above
    rng = np.random.default_rng(5)
    n, shape = 9, (5, 3, 10)
    graph = ring(5)
    data = ndimage.gaussian_filter(rng.standard_normal((n, *shape)), (0, 0, 0.6, 1.2)) + 0.2
    flips = np.vstack([np.ones(n), rng.choice([-1.0, 1.0], size=(12, n))])
    stats = np.stack([one_sample_t(data * f[:, None, None, None]).ravel() for f in flips])
    if step is None:
        expected = [np.abs(brute_tfce(s.reshape(shape), graph)).max() for s in stats]
    else:
        expected = tfce_null_reference(data, flips, **graph, step=step)
    split = TFCECollector(shape=shape, **graph, step=step)
    for start, stop in [(0, 5), (5, 6), (6, 13)]:
        split.update(stats[start:stop])
    whole = TFCECollector(shape=shape, **graph, step=step)
    whole.update(stats)
    assert np.allclose(split.arrays()["tfce.max"], expected, rtol=1e-11)
    assert np.array_equal(split.arrays()["tfce.max"], whole.arrays()["tfce.max"])


def test_tfce_input_errors():
    graph = ring(4)
    with pytest.raises(UserError, match="extent exponent E must be a finite number > 0"):
        tfce_map(np.zeros((4, 2, 3)), **graph, E=0.0)
    with pytest.raises(UserError, match="height exponent H must be a finite number >= 0"):
        TFCECollector(shape=(4, 2, 3), **graph, H=-1.0)
    with pytest.raises(UserError, match="TFCE step must be a positive statistic value or None"):
        TFCECollector(shape=(4, 2, 3), **graph, step=0.0)
    with pytest.raises(UserError, match="tail must be one of"):
        tfce_map(np.zeros((4, 2, 3)), **graph, tail="up")
    infinite = np.zeros((4, 2, 3))
    infinite[1, 1, 1] = np.inf
    with pytest.raises(UserError, match="statistic map has infinite values"):
        tfce_map(infinite, **graph)
    for step in (None, 0.1):
        # a null row with a non-finite value (a point degenerate only after permutation) is more extreme
        # than any observed value: its maximum is +inf, the other rows are untouched
        collector = TFCECollector(shape=(4, 2, 3), **graph, step=step)
        collector.update(np.vstack([np.zeros(24), infinite.ravel()]))
        assert collector.arrays()["tfce.max"].tolist() == [0.0, np.inf]


@pytest.mark.parametrize("n", [8, 10])
def test_exact_enumeration_p_equals_brute_force(n):
    # brute force written here: all 2^n sign flips, p = #{max |TFCE| of a flip >= |TFCE| at the point} / 2^n
    # (exact permutation p, Nichols & Holmes 2002; TFCE, Smith & Nichols 2009)
    rng = np.random.default_rng(n)
    graph, shape = ring(4), (4, 2, 8)
    data = ndimage.gaussian_filter(rng.standard_normal((n, *shape)), (0, 0, 0.5, 1.0))
    data[:, 1:3, :, 2:5] += 0.6
    flips = np.array(list(itertools.product([1.0, -1.0], repeat=n)))  # row 0 = identity
    signed = flips[:, :, None] * data.reshape(n, -1)[None]
    maps = signed.mean(1) / (signed.std(1, ddof=1) / np.sqrt(n))
    collector = TFCECollector(shape=shape, **graph)
    for block in np.array_split(maps, 3):
        collector.update(block)
    null = collector.arrays()["tfce.max"]
    observed = maps[0].reshape(shape)
    enhanced = brute_tfce(observed, graph)
    if n == 8:  # the brute-force null costs 2^n labelings of every level; check it on the smaller case
        brute_null = np.array([np.abs(brute_tfce(row.reshape(shape), graph)).max() for row in maps])
        assert np.allclose(null, brute_null, rtol=1e-11)
    # ties between the brute-force map and the kernel null are compared with a 1e-12 relative slack
    expected = (null[None, :] >= np.abs(enhanced).ravel()[:, None] * (1 - 1e-12)).mean(1).reshape(shape)
    result = tfce_inference(observed, null, **graph, alpha=0.05)
    assert np.allclose(result.maps["tfce"], enhanced, rtol=1e-11)
    assert np.array_equal(result.p_corrected, expected)
    assert np.array_equal(result.mask, expected <= 0.05) and result.mask.any()
    assert np.array_equal(result.mask, np.abs(result.maps["tfce"]) > result.threshold)
    assert result.threshold_kind == "tfce" and result.null is null


@pytest.mark.parametrize("step", [None, 0.1])
def test_collector_float32_block_equals_float64(step):
    # the null engine hands float32 blocks: their maxima equal those of the same values held in float64
    # (float32 to float64 is exact, IEEE 754-2008)
    rng = np.random.default_rng(11)
    graph = ring(5)
    maps = ndimage.gaussian_filter(rng.standard_normal((6, 5, 3, 10)), (0, 0, 0.6, 1.0)) * 4
    stats = maps.reshape(6, -1).astype(np.float32)
    single = TFCECollector(shape=(5, 3, 10), **graph, step=step)
    single.update(stats)
    double = TFCECollector(shape=(5, 3, 10), **graph, step=step)
    double.update(stats.astype(np.float64))
    assert np.array_equal(single.arrays()["tfce.max"], double.arrays()["tfce.max"])
    assert (single.arrays()["tfce.max"] > 0).all()
