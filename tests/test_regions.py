"""Significant regions of a TFCE result: the table and the region map, alone and through the pipeline."""

import json

import numpy as np
import pytest
from scipy import ndimage

from famwise.cli import main
from famwise.correct.regions import REGION_SIDECAR, significant_regions
from famwise.report.results import read_clusters

from conftest import write_tiny_study

NO_GRAPH = dict(indptr=np.zeros(2, np.int32), indices=np.zeros(0, np.int32))


def _one_channel_case(seed):
    rng = np.random.default_rng(seed)
    enhanced = ndimage.gaussian_filter(rng.standard_normal((1, 12, 30)), (0, 1.0, 1.5)) * 40
    p = np.clip(1.0 - np.abs(enhanced) / 10, 0.001, 1.0)
    return enhanced, p, p <= 0.05


def test_regions_on_one_channel_equal_scipy_label_of_the_mask_by_sign():
    enhanced, p, mask = _one_channel_case(1)
    stat = enhanced / 7
    region_id, rows = significant_regions(
        enhanced, p, mask, stat, **NO_GRAPH, channels=["Cz"], freqs=np.arange(4.0, 16.0), times=np.arange(30) / 100
    )
    assert (region_id != 0).sum() == mask.sum() > 0
    for sign in (1, -1):
        # scipy.ndimage.label, 4-connectivity (its default structure in 2-D), on each sign's significant points
        labels, n = ndimage.label((mask & (np.sign(enhanced) == sign))[0])
        assert n > 0
        found = {frozenset(zip(*np.nonzero(region_id[0] == sign * k))) for k in range(1, n + 1)}
        expected = {frozenset(zip(*np.nonzero(labels == k))) for k in range(1, n + 1)}
        assert found == expected
        peaks = [np.abs(enhanced[0][labels == k]).max() for k in range(1, n + 1)]
        by_id = {row["id"]: row for row in rows}
        for k, peak in enumerate(sorted(peaks, reverse=True), start=1):
            inside = region_id == sign * k
            assert by_id[sign * k]["statistic"] == peak  # numbered by descending peak |TFCE|
            assert by_id[sign * k]["p"] == p[inside].min()
            assert by_id[sign * k]["n_points"] == inside.sum()
            assert np.sign(by_id[sign * k]["peak_stat"]) == sign


def test_regions_follow_the_channel_graph():
    # two channels linked by the graph: a region spanning both is one region; unlinked, it is two
    enhanced = np.zeros((2, 1, 5))
    enhanced[:, 0, 1:4] = 5.0
    p = np.where(enhanced > 0, 0.01, 1.0)
    linked = dict(indptr=np.array([0, 1, 2], np.int32), indices=np.array([1, 0], np.int32))
    unlinked = dict(indptr=np.zeros(3, np.int32), indices=np.zeros(0, np.int32))
    axes = dict(channels=["C3", "C4"], freqs=np.array([10.0]), times=np.arange(5) / 10)
    assert len(significant_regions(enhanced, p, p < 0.05, enhanced, **linked, **axes)[1]) == 1
    _, rows = significant_regions(enhanced, p, p < 0.05, enhanced, **unlinked, **axes)
    assert [row["channels"] for row in rows] == ["C3", "C4"]


@pytest.mark.workflow
def test_tfce_correction_writes_its_regions_table(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=6, corrections="- method: tfce\n- method: cluster\n")
    assert main(["run", str(spec), "--cores", "2"]) == 0
    folder = tmp_path / "results" / "contrasts" / "high-vs-low" / "tfce"
    rows, columns = read_clusters(folder)
    assert columns == json.loads(json.dumps(REGION_SIDECAR))
    with np.load(folder / "result.npz") as result:
        mask, region_id, p = result["mask"], result["cluster_id"], result["p_corrected"]
    assert mask.any(), "the tiny study's injected 7 Hz effect should survive TFCE"
    assert ((region_id != 0) == mask).all()
    assert sum(row["n_points"] for row in rows) == mask.sum()
    assert all(row["p"] == p[region_id == row["id"]].min() <= 0.05 for row in rows)
    assert (tmp_path / "results" / "contrasts" / "high-vs-low" / "cluster" / "clusters.tsv").is_file()
    report = (tmp_path / "results" / "report" / "index.html").read_text()
    assert f"Regions: {len(rows)} of {len(rows)} with p" in report and "Clusters: " in report
    assert f"in {len(rows)} connected regions" in (tmp_path / "results" / "report" / "methods.md").read_text()
