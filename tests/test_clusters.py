"""Cluster-based permutation inference: exact p-values, the cluster table, FWER under the null."""

import itertools
import json

import numpy as np
import pytest
import scipy.sparse as sp
from scipy import ndimage, stats
from scipy.sparse.csgraph import connected_components

from famwise.correct.clusters import CLUSTER_COLUMNS, cluster_inference, write_cluster_table
from famwise.errors import UserError
from famwise.nulls.collectors.largest_cluster import ClusterCollector

from conftest import ring


def t_maps(data, flips):
    """One-sample t (ddof 1) of every sign-flip row, shape (n_rows, n_points)."""
    signed = flips[:, :, None] * data.reshape(data.shape[0], -1)[None]
    return signed.mean(1) / (signed.std(1, ddof=1) / np.sqrt(data.shape[0]))


def brute_clusters(stat, graph, threshold):
    """(sign, points, mass) of every cluster, by scipy.sparse.csgraph on a product graph built here."""
    n_ch, n_f, n_t = stat.shape
    channel = sp.csr_matrix((np.ones(len(graph["indices"])), graph["indices"], graph["indptr"]), shape=(n_ch, n_ch))
    path = lambda n: sp.diags([np.ones(n - 1)] * 2, [-1, 1])  # noqa: E731
    adjacency = sp.csr_matrix(
        sp.kron(channel, sp.identity(n_f * n_t))
        + sp.kron(sp.identity(n_ch), sp.kron(path(n_f), sp.identity(n_t)))
        + sp.kron(sp.identity(n_ch * n_f), path(n_t))
    )
    out = []
    for sign in (1, -1):
        selected = np.flatnonzero(sign * stat.ravel() > threshold)
        if selected.size:
            _, labels = connected_components(adjacency[selected][:, selected], directed=False)
            for k in range(labels.max() + 1):
                points = selected[labels == k]
                out.append((sign, points, np.abs(stat.ravel()[points]).sum()))
    return out


AXES = dict(channels=[f"E{c}" for c in range(5)], freqs=np.array([4.0, 6.0, 8.0]), times=np.arange(12) * 0.02 - 0.05)


@pytest.mark.parametrize("n", [8, 9])
def test_exact_enumeration_p_equals_brute_force(n):
    # brute force written here: all 2^n sign flips, p = #{null max >= cluster mass} / 2^n
    # (exact permutation p, Nichols & Holmes 2002; cluster mass, Maris & Oostenveld 2007)
    rng = np.random.default_rng(n)
    graph = ring(5)
    data = ndimage.gaussian_filter(rng.standard_normal((n, 5, 3, 12)), (0, 0, 0.7, 1.2))
    data[:, 1:3, :, 4:8] += 0.5
    flips = np.array(list(itertools.product([1.0, -1.0], repeat=n)))  # row 0 = identity
    maps = t_maps(data, flips)
    threshold = stats.t.isf(0.05, n - 1)
    null = np.array(
        [max((m for *_, m in brute_clusters(row.reshape(5, 3, 12), graph, threshold)), default=0.0) for row in maps]
    )
    collector = ClusterCollector(threshold=threshold, shape=(5, 3, 12), **graph)
    for block in np.array_split(maps, 5):
        collector.update(block)
    assert np.allclose(collector.arrays()["cluster.max"], null, rtol=1e-12)
    observed = maps[0].reshape(5, 3, 12)
    result = cluster_inference(
        observed, collector.arrays()["cluster.max"], threshold=threshold, **graph, alpha=0.05, **AXES
    )
    expected_p = np.ones(observed.size)
    clusters = brute_clusters(observed, graph, threshold)
    assert len(result.clusters) == len(clusters) > 0
    for sign, points, mass in clusters:
        p = np.mean(null >= mass)
        expected_p[points] = p
        row = next(r for r in result.clusters if np.isclose(r["statistic"], mass, rtol=1e-12))
        assert row["p"] == pytest.approx(p, abs=1e-15) and row["n_points"] == points.size
        assert (row["sign"] == "positive") == (sign > 0)
    assert np.allclose(result.p_corrected.ravel(), expected_p, atol=1e-15)
    assert np.array_equal(result.mask, result.p_corrected <= 0.05)
    for row in result.clusters:  # the critical value separates significant from non-significant clusters
        assert (row["p"] <= 0.05) == (row["statistic"] > result.threshold)
    assert result.threshold_kind == "cluster" and result.null is not None


def test_cluster_table_and_sidecar(tmp_path):
    stat = np.zeros((5, 3, 12))
    stat[1:3, 0:2, 3:6] = 3.0
    stat[2, 1, 4] = 4.5
    stat[4, 2, 10] = -3.5
    result = cluster_inference(stat, np.array([20.0, 1.0, 5.0, 3.0]), threshold=2.0, **ring(5), alpha=0.5, **AXES)
    first, second = result.clusters
    assert first == {
        "id": 1,
        "sign": "positive",
        "statistic": 3.0 * 11 + 4.5,
        "p": 0.25,
        "n_points": 12,
        "channels": "E1,E2",
        "time_start_ms": pytest.approx(10.0),
        "time_end_ms": pytest.approx(50.0),
        "freq_low_hz": 4.0,
        "freq_high_hz": 6.0,
        "peak_stat": 4.5,
        "peak_channel": "E2",
        "peak_freq_hz": 6.0,
        "peak_time_ms": pytest.approx(30.0),
    }
    assert second["id"] == -1 and second["p"] == 0.5 and second["peak_stat"] == -3.5
    assert result.maps["cluster_id"][4, 2, 10] == -1 and result.maps["cluster_id"][1, 0, 3] == 1
    assert result.p_corrected[0, 0, 0] == 1.0 and result.p_corrected[4, 2, 10] == 0.5
    assert result.threshold == 3.0  # exceed the 3rd largest of 4 null values to get p <= 0.5
    path = tmp_path / "clusters.tsv"
    write_cluster_table(path, result.clusters)
    lines = path.read_text().splitlines()
    assert lines[0].split("\t") == list(CLUSTER_COLUMNS)
    assert lines[1].split("\t")[:6] == ["1", "positive", "37.5", "0.25", "12", "E1,E2"]
    sidecar = json.loads((tmp_path / "clusters.json").read_text())
    assert set(sidecar) == set(CLUSTER_COLUMNS)
    assert sidecar["time_start_ms"]["Units"] == "ms" and sidecar["freq_low_hz"]["Units"] == "Hz"
    assert all(entry["Description"] for entry in sidecar.values())
    assert sorted(p.name for p in tmp_path.iterdir()) == ["clusters.json", "clusters.tsv"]


def test_inference_input_errors():
    stat = np.zeros((5, 3, 12))
    with pytest.raises(UserError, match="alpha must be between 0 and 1, got 1.5"):
        cluster_inference(stat, np.ones(3), threshold=2.0, **ring(5), alpha=1.5, **AXES)


def null_rejections(n_datasets, seed, n_rows=100, alpha=0.05):
    """Family-wise rejections of cluster and TFCE inference on smooth null data (Monte Carlo sign flips)."""
    from famwise.correct.tfce import tfce_inference
    from famwise.nulls.collectors.largest_tfce import TFCECollector

    rng = np.random.default_rng(seed)
    n, shape, graph = 12, (6, 4, 16), ring(6)
    threshold = stats.t.isf(0.025, n - 1)
    hits = np.zeros(2, int)
    for _ in range(n_datasets):
        noise = rng.standard_normal((n, *shape))
        data = ndimage.gaussian_filter(noise + 0.5 * np.roll(noise, 1, axis=1), (0, 0, 0.8, 1.5))
        flips = np.vstack([np.ones(n), rng.choice([-1.0, 1.0], size=(n_rows - 1, n))])
        maps = t_maps(data, flips)
        clusters = ClusterCollector(threshold=threshold, shape=shape, **graph)
        tfce = TFCECollector(shape=shape, **graph)
        clusters.update(maps)
        tfce.update(maps)
        observed = maps[0].reshape(shape)
        names = dict(channels=[f"E{c}" for c in range(6)], freqs=np.arange(4.0), times=np.arange(16.0))
        hits[0] += cluster_inference(
            observed, clusters.arrays()["cluster.max"], threshold=threshold, **graph, alpha=alpha, **names
        ).mask.any()
        hits[1] += tfce_inference(observed, tfce.arrays()["tfce.max"], **graph, alpha=alpha).mask.any()
    return hits


def test_fwer_under_null_small():
    # Maris & Oostenveld 2007 (cluster), Smith & Nichols 2009 (TFCE): FWER <= alpha under H0;
    # bound: binomial 95% upper quantile (scipy.stats.binom.ppf)
    hits = null_rejections(100, seed=2024)
    assert np.all(hits <= stats.binom.ppf(0.95, 100, 0.05))


@pytest.mark.slow
def test_fwer_under_null_large():
    # as above with 1000 datasets (Maris & Oostenveld 2007; scipy.stats.binom.ppf)
    hits = null_rejections(1000, seed=7)
    assert np.all(hits <= stats.binom.ppf(0.95, 1000, 0.05))


def test_injected_effect_is_found():
    # common practice, no source: a strong effect on two channels is one significant positive cluster
    rng = np.random.default_rng(0)
    n, shape, graph = 12, (6, 4, 16), ring(6)
    data = ndimage.gaussian_filter(rng.standard_normal((n, *shape)), (0, 0, 0.8, 1.5))
    data[:, 2:4, 1:3, 5:10] += 1.0
    flips = np.vstack([np.ones(n), rng.choice([-1.0, 1.0], size=(199, n))])
    maps = t_maps(data, flips)
    threshold = stats.t.isf(0.025, n - 1)
    collector = ClusterCollector(threshold=threshold, shape=shape, **graph)
    collector.update(maps)
    result = cluster_inference(
        maps[0].reshape(shape),
        collector.arrays()["cluster.max"],
        threshold=threshold,
        **graph,
        channels=[f"E{c}" for c in range(6)],
        freqs=np.arange(4.0),
        times=np.arange(16.0),
    )
    assert result.clusters[0]["id"] == 1 and result.clusters[0]["p"] <= 0.01
    assert result.mask[2:4, 1:3, 6:9].all()


def test_collector_takes_float32_blocks_as_their_float64_values():
    # the null engine hands float32 blocks; the maxima equal those of the same values in float64
    # (float32 to float64 is exact, IEEE 754-2008)
    rng = np.random.default_rng(4)
    graph = ring(5)
    maps = ndimage.gaussian_filter(rng.standard_normal((9, 5, 3, 12)), (0, 0, 0.7, 1.2)).reshape(9, -1) * 6
    single = maps.astype(np.float32)
    threshold = 2.1
    wide, narrow = (ClusterCollector(threshold=threshold, shape=(5, 3, 12), **graph) for _ in range(2))
    wide.update(single.astype(np.float64))
    narrow.update(single)
    assert narrow.arrays()["cluster.max"].tobytes() == wide.arrays()["cluster.max"].tobytes()
    assert (wide.arrays()["cluster.max"] > 0).all()
