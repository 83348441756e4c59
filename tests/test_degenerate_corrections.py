"""Left-out points in every correction, and permutation rows in which a point becomes degenerate.

Each correction run with a degenerate channel left out is compared with the
same correction run on the map with that channel removed (common practice,
no source: a left-out point must behave as if it had never been tested).
"""

import textwrap

import numpy as np
import pytest

from famwise.atomic import save_npz
from famwise.correct import pvalues
from famwise.correct.apply import apply_correction
from famwise.design import ContrastData
from famwise.nulls.engine import run_shard
from famwise.nulls.screen import BlockScreen
from famwise.nulls.shard import make_collectors, null_shard, table_for
from famwise.observed import observed_arrays, save_observed
from famwise.plan import Plan
from famwise.spec import load_study

SPEC = """\
version: 1
name: degenerate test
seed: 5
subjects: {{source: epochs, path: "data/sub-{{subject}}.npz"}}
conditions: {{a: [a]}}
contrasts:
  - {{name: c1, test: one-sample, conditions: [a]}}
inference:
  permutations: 300
  tail: {tail}
  degenerate_points: leave-out
  corrections:
{corrections}
"""

CORRECTIONS = """\
- method: bonferroni
- method: sidak
- method: holm
- method: hochberg
- method: fdr-bh
- method: fdr-by
- method: holm
  pvalues: permutation
  name: holm-perm
- method: max-stat
- method: max-stat
  step_down: true
  name: step-down
- method: cluster
  forming_p: 0.05
- method: tfce
"""
LABELS = [
    "bonferroni",
    "sidak",
    "holm",
    "hochberg",
    "fdr-bh",
    "fdr-by",
    "holm-perm",
    "max-stat",
    "step-down",
    "cluster",
    "tfce",
]


def _plan(folder, tail="two-sided", corrections=CORRECTIONS):
    spec = folder / "study.yaml"
    spec.write_text(SPEC.format(tail=tail, corrections=textwrap.indent(corrections, "    ")))
    return Plan(load_study(spec))  # no subject files: only the inference settings are used


def _chain_graph(path, n_channels):
    indices = [[j for j in (c - 1, c + 1) if 0 <= j < n_channels] for c in range(n_channels)]
    indptr = np.cumsum([0] + [len(row) for row in indices]).astype(np.int32)
    save_npz(path, indptr=indptr, indices=np.concatenate(indices).astype(np.int32))
    return path


def _run(folder, x, plan, n_channels):
    """Every correction's result for one contrast of maps ``x`` (n, C, F, T)."""
    folder.mkdir()
    n, shape = x.shape[0], x.shape[1:]
    data = ContrastData(
        x=x.reshape(n, -1).astype(np.float32),
        test="one-sample",
        subjects=tuple(f"s{i}" for i in range(n)),
        channels=tuple(f"ch{i}" for i in range(n_channels)),
        freqs=np.array([4.0, 6.0, 8.0])[: shape[1]],
        times=np.arange(shape[2]) / 50,
    )
    contrast = folder / "contrasts" / "c1"
    contrast.mkdir(parents=True)
    data.save(contrast / "subjects.npz")
    save_observed(contrast / "observed.npz", observed_arrays(data, data.x, plan.observed_settings()))
    graph = _chain_graph(folder / "graph.npz", n_channels)
    (contrast / "nulls").mkdir()
    shard = null_shard(
        contrast / "subjects.npz", contrast / "observed.npz", graph, shard=0, settings=plan.null_settings()
    )
    save_npz(contrast / "nulls" / "shard-0.npz", **shard)
    results = {}
    for label in LABELS:
        files = [contrast / "observed.npz", contrast / "nulls" / "shard-0.npz", graph]
        results[label] = apply_correction(files, contrast="c1", settings=plan.correction_settings(label))[0]
    return results


def _maps(seed=2, n=9, shape=(4, 3, 8)):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, *shape))
    x[:, 1:3, :, 2:6] += 1.3  # an effect on channels 1-2
    return x


@pytest.mark.parametrize("tail", ["two-sided", "greater"])
def test_each_correction_leaves_a_degenerate_channel_out_as_if_removed(tmp_path, tail):
    plan = _plan(tmp_path, tail)
    x = _maps()
    x[:, 3] = 0.25  # channel 3 identical in every subject (an interpolated or zeroed channel)
    left_out = _run(tmp_path / "left-out", x, plan, 4)
    removed = _run(tmp_path / "removed", x[:, :3], plan, 3)
    for label in LABELS:
        with_points, without = left_out[label], removed[label]
        p = np.asarray(with_points.p_corrected).reshape(4, 3, 8)
        mask = np.asarray(with_points.mask).reshape(4, 3, 8)
        assert np.all(np.isnan(p[3])) and not mask[3].any(), label
        assert np.array_equal(mask[:3], np.asarray(without.mask).reshape(3, 3, 8)), label
        assert np.allclose(p[:3], np.asarray(without.p_corrected).reshape(3, 3, 8), rtol=1e-12, atol=0), label
        if "m" in without.settings:
            assert with_points.settings["m"] == without.settings["m"] == 72, label
    assert left_out["max-stat"].n_significant > 0 and left_out["cluster"].n_significant > 0


def test_scattered_left_out_points_are_not_counted_in_m(tmp_path):
    plan = _plan(tmp_path, corrections="- method: holm\n- method: fdr-bh\n")
    x = _maps()
    x[:, 0, 1, 3] = 4.0  # identical
    x[5, 2, 2, 7] = np.nan  # NaN in one subject
    folder = tmp_path / "run"
    folder.mkdir()
    flat = x.reshape(9, -1)
    data = ContrastData(
        x=flat.astype(np.float32),
        test="one-sample",
        subjects=tuple(f"s{i}" for i in range(9)),
        channels=("a", "b", "c", "d"),
        freqs=np.array([4.0, 6.0, 8.0]),
        times=np.arange(8) / 50,
    )
    observed = observed_arrays(data, data.x, plan.observed_settings())
    (folder / "contrasts" / "c1").mkdir(parents=True)
    save_observed(folder / "contrasts" / "c1" / "observed.npz", observed)
    keep = ~observed["left_out"].reshape(-1)
    assert keep.sum() == 94
    for label in ("holm", "fdr-bh"):
        result, _ = apply_correction(
            [folder / "contrasts" / "c1" / "observed.npz"], contrast="c1", settings=plan.correction_settings(label)
        )
        reference = pvalues.adjust(observed["p"].reshape(-1)[keep], method=label)
        assert result.settings["m"] == 94
        assert np.array_equal(np.asarray(result.p_corrected)[keep], reference.p_corrected)
        assert np.all(np.isnan(np.asarray(result.p_corrected)[~keep])) and not np.asarray(result.mask)[~keep].any()


def _t_rows(x, rows):
    """One-sample t of every sign-flip row (n_rows, P), float64, by numpy (scipy.stats.ttest_1samp's formula)."""
    signs = np.where(rows, -1.0, 1.0) if rows.dtype == bool else rows.astype(float)
    flipped = signs[:, :, None] * x[None]
    with np.errstate(divide="ignore", invalid="ignore"):
        return flipped.mean(axis=1) / (flipped.std(axis=1, ddof=1) / np.sqrt(x.shape[0]))


def test_a_point_degenerate_only_after_permutation_counts_as_more_extreme(tmp_path):
    plan = _plan(
        tmp_path,
        corrections="- method: max-stat\n  step_down: true\n- method: cluster\n  forming_stat: 1.0\n"
        "- method: tfce\n- method: holm\n  pvalues: permutation\n",
    )
    rng = np.random.default_rng(7)
    x = rng.normal(size=(5, 4))
    x[:, 0] = [2.0, 2.0, -2.0, 2.0, 2.0]  # equal |value|: the flips that align every sign leave no variance
    data = ContrastData(
        x=x.astype(np.float32),
        test="one-sample",
        subjects=tuple("abcde"),
        channels=("p", "q"),
        freqs=np.array([5.0]),
        times=np.array([0.0, 0.1]),
    )
    observed = observed_arrays(data, data.x, plan.observed_settings())
    assert not observed["left_out"].any()
    table = table_for(data, settings=plan.null_settings())
    assert table.exact and table.n_rows == 32
    graph = (np.array([0, 1, 2], np.int32), np.array([1, 0], np.int32))
    collectors = make_collectors(plan.null_settings().collectors, observed=observed, shape=data.shape, graph=graph)
    arrays = run_shard(
        data.x,
        table.rows,
        collectors=collectors,
        test="one-sample",
        screen=BlockScreen(observed["left_out"], tail="two-sided"),
    )

    t = _t_rows(x, table.rows)  # direct computation
    degenerate_rows = ~np.isfinite(t).all(axis=1)
    signs = np.where(table.rows, -1.0, 1.0) if table.rows.dtype == bool else table.rows
    aligned = np.abs((signs * np.sign(x[:, 0])).sum(axis=1)) == 5
    assert np.array_equal(degenerate_rows, aligned) and degenerate_rows.sum() == 2
    expected_max = np.where(degenerate_rows, np.inf, np.nanmax(np.abs(np.where(np.isfinite(t), t, 0)), axis=1))
    for key in ("max-stat", "cluster", "tfce"):
        maxima = arrays[f"{key}.max"]
        assert np.array_equal(np.isinf(maxima), degenerate_rows), key
        assert np.all(np.isfinite(maxima[~degenerate_rows])), key
    assert np.allclose(arrays["max-stat.max"], expected_max, rtol=1e-5)
    obs = np.abs(observed["stat"].reshape(-1))
    reach = ~np.isfinite(t) | (np.abs(t) >= obs * (1 - 1e-5))
    assert np.array_equal(arrays["exceed.count"], reach.sum(axis=0))
    # step-down: u_j = max over points ranked j and below; a row with a non-finite value reaches every point
    order = np.argsort(-obs, kind="stable")
    counts = np.zeros(4, int)
    for rank, point in enumerate(order):
        below = order[rank:]
        u = np.where(degenerate_rows, np.inf, np.abs(np.where(np.isfinite(t), t, 0))[:, below].max(axis=1))
        counts[point] = int(np.count_nonzero(u >= obs[point] * (1 - 1e-5)))
    assert np.array_equal(arrays["max-stat.count"], counts)


def test_calibration_leaves_out_the_studys_left_out_points_as_if_removed(tmp_path):
    from famwise.calibrate import calibration_settings
    from famwise.calibrate.datasets import calibration_shard

    corrections = "- method: holm\n- method: max-stat\n- method: cluster\n  forming_p: 0.05\n- method: tfce\n"
    plan = _plan(tmp_path, corrections=corrections)
    settings = calibration_settings(plan, "c1", datasets=6, permutations=63, shards=1)
    x = _maps(seed=9)
    x[:, 3] = 0.25  # identical in every subject: sign-flipped null datasets would make it vary
    counts = {}
    for name, maps, n_channels in (("left-out", x, 4), ("removed", x[:, :3], 3)):
        folder = tmp_path / name
        folder.mkdir()
        n, shape = maps.shape[0], maps.shape[1:]
        data = ContrastData(
            x=maps.reshape(n, -1).astype(np.float32),
            test="one-sample",
            subjects=tuple(f"s{i}" for i in range(n)),
            channels=tuple(f"ch{i}" for i in range(n_channels)),
            freqs=np.array([4.0, 6.0, 8.0]),
            times=np.arange(shape[2]) / 50,
        )
        data.save(folder / "subjects.npz")
        graph = _chain_graph(folder / "graph.npz", n_channels)
        counts[name] = calibration_shard(folder / "subjects.npz", graph, shard=0, settings=settings)["n_significant"]
    assert np.array_equal(counts["left-out"], counts["removed"])
    assert counts["left-out"][:, 0].sum() > 0  # the uncorrected count sees the maps' effect
