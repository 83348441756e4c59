"""`famwise calibrate` on the weighted, interaction and between-groups designs: null datasets and FWER."""

import numpy as np
import pytest
from test_calibrate import (
    FWER_CORRECTIONS,
    _chain_graph,
    _contrast,
    _plan,
    _run,
    _settings,
    _smooth_maps,
    _upper_bound_holds,
)

from famwise.calibrate.datasets import dataset_rng, null_dataset

THREE_GROUPS = np.array([0, 1, 2] * 3)


def test_weighted_dataset_flips_whole_maps_and_groups_datasets_reorder_subjects():
    rng = np.random.default_rng(30)
    x = _smooth_maps(rng, 9)
    flipped = null_dataset(_contrast(x, test="weighted"), dataset_rng(5, "c1", 0))
    ratio = flipped / x
    assert np.allclose(np.abs(ratio), 1) and np.all(ratio == ratio[:, :1]) and (ratio[:, 0] < 0).any()
    shuffled = null_dataset(_contrast(x, test="between-groups", groups=THREE_GROUPS), dataset_rng(5, "c1", 3))
    match = [int(np.flatnonzero((x == row).all(axis=1))[0]) for row in shuffled]
    assert sorted(match) == list(range(9)) and match != list(range(9))


@pytest.mark.parametrize(
    "test, groups, permutations",
    [
        ("weighted", None, 511),  # all 2^9 sign flips
        ("two-sample", np.array([0, 1] * 4 + [0]), 125),  # all 9! / (5! 4!) = 126 relabellings
        ("between-groups", THREE_GROUPS, 1679),  # all 9! / (3! 3! 3!) = 1680 assignments
    ],
)
def test_permutation_corrections_control_fwer_on_smooth_null_maps(tmp_path, test, groups, permutations):
    # Exact tables: under these randomisations the permutation corrections' FWER is at most alpha
    # (Nichols & Holmes 2002); the detections stay within the binomial bound (Clopper & Pearson 1934).
    rng = np.random.default_rng(31)
    _contrast(_smooth_maps(rng, 9), test=test, groups=groups).save(tmp_path / "subjects.npz")
    graph = _chain_graph(tmp_path / "graph.npz", 4)
    plan = _plan(tmp_path, corrections=FWER_CORRECTIONS, permutations=permutations, seed=31)
    _, merged = _run(tmp_path / "subjects.npz", graph, _settings(plan, datasets=30, shards=2))
    detected = merged["n_significant"] > 0
    labels = [str(label) for label in merged["labels"]]
    assert detected[:, 0].sum() > 3  # uncorrected: smooth maps of 240 points give false positives
    for column, label in enumerate(labels[1:], start=1):
        assert _upper_bound_holds(int(detected[:, column].sum()), 30, 0.05), label
