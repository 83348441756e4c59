"""Connected components on the channel x frequency x time product neighborhood."""

import numpy as np
import pytest
import scipy.sparse as sp
from scipy import ndimage
from scipy.sparse.csgraph import connected_components

from famwise.correct.clusters import label_clusters
from famwise.errors import UserError
from famwise.naive.clusters import cluster_labels_reference, cluster_null_reference, one_sample_t
from famwise.nulls.collectors.largest_cluster import ClusterCollector

from conftest import ring


def ring_arrays(n_ch):
    """(indptr, indices) of `ring`."""
    graph = ring(n_ch)
    return graph["indptr"], graph["indices"]


NO_CHANNELS = (np.array([0, 0], np.int32), np.zeros(0, np.int32))


def same_partition(a, b):
    """True when two label maps (0 = background) group the points identically."""
    a, b = np.ravel(a), np.ravel(b)
    if not np.array_equal(a != 0, b != 0):
        return False
    pairs = set(zip(a[a != 0].tolist(), b[b != 0].tolist()))
    return len(pairs) == len(set(a[a != 0].tolist())) == len(set(b[b != 0].tolist()))


def test_diagonal_points_stay_apart():
    # 4-connectivity gives 3 clusters of mass 3 (scipy.ndimage.label)
    stat = np.array([[[3.0, 0, 0], [0, 3, 0], [0, 0, 3]]])
    ids, stats = label_clusters(stat, threshold=2.0, indptr=NO_CHANNELS[0], indices=NO_CHANNELS[1])
    assert sorted(stats.values()) == [3.0, 3.0, 3.0]
    assert set(ids.ravel().tolist()) == {0, 1, 2, 3}


@pytest.mark.parametrize("seed", range(5))
def test_one_channel_equals_ndimage_label(seed):
    # reference: scipy.ndimage.label with 4-connectivity (generate_binary_structure(2, 1))
    rng = np.random.default_rng(seed)
    stat = ndimage.gaussian_filter(rng.standard_normal((12, 30)), 1.0) * 3
    ids, _ = label_clusters(stat[None], threshold=0.8, indptr=NO_CHANNELS[0], indices=NO_CHANNELS[1], tail="greater")
    expected, _ = ndimage.label(stat > 0.8, structure=ndimage.generate_binary_structure(2, 1))
    assert same_partition(ids[0], expected)


def explicit_adjacency(n_ch, n_f, n_t, indptr, indices):
    """Product graph built point by point from the neighborhood definition (DESIGN.md)."""
    index = np.arange(n_ch * n_f * n_t).reshape(n_ch, n_f, n_t)
    rows, cols = [], []
    for c in range(n_ch):
        for f in range(n_f):
            for t in range(n_t):
                mine = [index[c2, f, t] for c2 in indices[indptr[c] : indptr[c + 1]]]
                mine += [index[c, f2, t] for f2 in (f - 1, f + 1) if 0 <= f2 < n_f]
                mine += [index[c, f, t2] for t2 in (t - 1, t + 1) if 0 <= t2 < n_t]
                rows += [index[c, f, t]] * len(mine)
                cols += mine
    return sp.csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(index.size, index.size))


@pytest.mark.parametrize("seed", range(4))
def test_product_graph_equals_csgraph(seed):
    # reference: scipy.sparse.csgraph.connected_components on an explicitly built adjacency
    rng = np.random.default_rng(seed)
    n_ch, n_f, n_t = 7, 5, 9
    indptr, indices = ring_arrays(n_ch)
    stat = rng.standard_normal((n_ch, n_f, n_t)) * 2
    ids, _ = label_clusters(stat, threshold=1.0, indptr=indptr, indices=indices)
    adjacency = explicit_adjacency(n_ch, n_f, n_t, indptr, indices)
    expected = np.zeros(stat.size, np.int64)
    for sign in (1, -1):
        selected = np.flatnonzero(sign * stat.ravel() > 1.0)
        _, labels = connected_components(adjacency[selected][:, selected], directed=False)
        expected[selected] = sign * (labels + 1)
    assert same_partition(ids, expected)


@pytest.mark.parametrize("dims", [("freq", "time"), ("channel", "time"), ("channel",), ("time",)])
def test_restricted_dims_match_reference(dims):
    # reference: famwise.naive.clusters (scipy.sparse.csgraph on the explicit product graph)
    rng = np.random.default_rng(3)
    indptr, indices = ring_arrays(6)
    stat = ndimage.gaussian_filter(rng.standard_normal((6, 4, 20)), (0, 0.7, 1.5)) * 4
    ids, stats = label_clusters(stat, threshold=0.7, indptr=indptr, indices=indices, dims=dims)
    clusters = cluster_labels_reference(stat, threshold=0.7, indptr=indptr, indices=indices, dims=dims)
    expected = np.zeros(stat.size, np.int64)
    for k, (sign, points, _) in enumerate(clusters):
        expected[points] = sign * (k + 1)
    assert same_partition(ids, expected)
    assert np.allclose(sorted(stats.values()), sorted(v for *_, v in clusters), rtol=1e-12)
    if "channel" not in dims:  # no cluster spans two channels
        for k in stats:
            assert np.unique(np.nonzero(ids == k)[0]).size == 1


def test_min_supra_neighbors_drops_isolated_points():
    # hand-made: channel 0's point has one supra-threshold neighbor channel, channel 3's has none
    indptr, indices = ring_arrays(6)
    stat = np.zeros((6, 1, 1))
    stat[[0, 1, 3], 0, 0] = 5.0
    ids, stats = label_clusters(stat, threshold=1.0, indptr=indptr, indices=indices, min_supra_neighbors=1)
    assert ids[3, 0, 0] == 0 and ids[0, 0, 0] == ids[1, 0, 0] == 1
    assert stats == {1: 10.0}
    ids, _ = label_clusters(stat, threshold=1.0, indptr=indptr, indices=indices, min_supra_neighbors=2)
    assert not ids.any()


def test_numbering_by_descending_statistic_per_sign():
    stat = np.zeros((1, 1, 12))
    stat[0, 0, [0, 1]] = 3.0  # mass 6
    stat[0, 0, [4, 5, 6]] = 4.0  # mass 12
    stat[0, 0, [9]] = -7.0
    stat[0, 0, [11]] = -2.5
    ids, stats = label_clusters(stat, threshold=2.0, indptr=NO_CHANNELS[0], indices=NO_CHANNELS[1])
    assert ids[0, 0].tolist() == [2, 2, 0, 0, 1, 1, 1, 0, 0, -1, 0, -2]
    assert stats == {1: 12.0, 2: 6.0, -1: 7.0, -2: 2.5}
    _, sizes = label_clusters(
        stat, threshold=2.0, indptr=NO_CHANNELS[0], indices=NO_CHANNELS[1], cluster_stat="size", tail="greater"
    )
    assert sizes == {1: 3.0, 2: 2.0}


@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
@pytest.mark.parametrize("min_neighbors", [0, 1])
def test_collector_matches_reference_null(tail, min_neighbors):
    # reference: famwise.naive.clusters (t recomputed per row, scipy.sparse.csgraph labels)
    rng = np.random.default_rng(11)
    n, shape = 10, (6, 4, 15)
    indptr, indices = ring_arrays(6)
    data = ndimage.gaussian_filter(rng.standard_normal((n, *shape)), (0, 0, 0.8, 1.5)) + 0.3
    flips = np.vstack([np.ones(n), rng.choice([-1.0, 1.0], size=(20, n))])
    settings = dict(threshold=1.8, indptr=indptr, indices=indices, min_supra_neighbors=min_neighbors, tail=tail)
    expected = cluster_null_reference(data, flips, **settings)
    stats = np.stack([one_sample_t(data * f[:, None, None, None]).ravel() for f in flips])
    collector = ClusterCollector(shape=shape, **settings)
    collector.update(stats[:7])
    collector.update(stats[7:8])
    collector.update(stats[8:])
    got = collector.arrays()["cluster.max"]
    assert np.allclose(got, expected, rtol=1e-12)
    single = ClusterCollector(shape=shape, **settings)
    single.update(stats)
    assert np.array_equal(single.arrays()["cluster.max"], got)  # block split does not matter


def test_collector_input_errors():
    indptr, indices = ring_arrays(4)
    good = dict(threshold=2.0, shape=(4, 2, 3), indptr=indptr, indices=indices)
    with pytest.raises(UserError, match="cluster-forming threshold must be a finite statistic value"):
        ClusterCollector(**{**good, "threshold": float("nan")})
    with pytest.raises(UserError, match="cluster_stat must be one of"):
        ClusterCollector(**good, cluster_stat="peak")
    with pytest.raises(UserError, match="min_supra_neighbors must be a whole number"):
        ClusterCollector(**good, min_supra_neighbors=-1)
    with pytest.raises(UserError, match="tail must be one of"):
        ClusterCollector(**good, tail="both")
    with pytest.raises(UserError, match="cluster dims must be distinct names"):
        ClusterCollector(**good, dims=("channel", "space"))
    with pytest.raises(UserError, match="indptr of length 5"):
        ClusterCollector(**{**good, "shape": (5, 2, 3)})
    with pytest.raises(UserError, match="map shape must be"):
        ClusterCollector(**{**good, "shape": (4, 0, 3)})
    with pytest.raises(UserError, match="not symmetric: 0 -> 1"):
        ClusterCollector(**{**good, "indptr": np.array([0, 1, 1, 1, 1]), "indices": np.array([1])})
    with pytest.raises(UserError, match="self loop at channel 0"):
        ClusterCollector(**{**good, "indptr": np.array([0, 1, 1, 1, 1]), "indices": np.array([0])})
    with pytest.raises(UserError, match="names channel index 7"):
        ClusterCollector(**{**good, "indptr": np.array([0, 1, 1, 1, 1]), "indices": np.array([7])})
