"""famwise calibrate: null datasets from the subjects' own maps, error rates per correction."""

import json
import math
import textwrap

import numpy as np
import pytest
import scipy.stats
from scipy.ndimage import gaussian_filter

from famwise.atomic import save_npz
from famwise.calibrate import calibration_settings, fwer_interval, summarize
from famwise.calibrate.datasets import calibration_shard, dataset_rng, null_dataset
from famwise.calibrate.table import merge_shards, read_table
from famwise.design import ContrastData
from famwise.errors import UserError
from famwise.plan import Plan
from famwise.report.calibration import calibration_section_html
from famwise.spec import load_study

SPEC = """\
version: 1
name: calibration test
seed: {seed}
subjects: {{source: epochs, path: "data/sub-{{subject}}.npz"}}
conditions: {{a: [a]}}
contrasts:
  - {{name: c1, test: one-sample, conditions: [a]}}
inference:
  alpha: 0.05
  permutations: {permutations}
  corrections:
{corrections}
"""

FWER_CORRECTIONS = """\
- method: bonferroni
- method: holm
- method: max-stat
- method: max-stat
  step_down: true
  name: step-down
- method: cluster
  forming_p: 0.05
- method: tfce
"""


def _plan(folder, *, corrections="- method: bonferroni\n", permutations=99, seed=3):
    spec = folder / "study.yaml"
    spec.write_text(SPEC.format(seed=seed, permutations=permutations, corrections=textwrap.indent(corrections, "    ")))
    return Plan(load_study(spec))  # no subject files: only the inference settings are used


def _settings(plan, *, datasets, shards=1, permutations=None):
    return calibration_settings(plan, "c1", datasets=datasets, permutations=permutations, shards=shards)


def _smooth_maps(rng, n, shape=(4, 5, 12), *, test="one-sample", k=None):
    """Gaussian null maps smoothed over frequency and time (no effect anywhere)."""
    lead = (n,) if k is None else (n, k)
    noise = rng.normal(size=lead + shape)
    sigma = (0,) * len(lead) + (0.6, 1.0, 1.5)
    x = gaussian_filter(noise, sigma=sigma).reshape(lead + (-1,))
    return x.astype(np.float32)


def _contrast(x, *, test="one-sample", shape=(4, 5, 12), groups=None, covariate=None):
    n = x.shape[0]
    return ContrastData(
        x=x,
        test=test,
        subjects=tuple(f"s{i}" for i in range(n)),
        channels=tuple(f"ch{i}" for i in range(shape[0])),
        freqs=np.linspace(4, 12, shape[1]),
        times=np.arange(shape[2]) / 50,
        groups=groups,
        covariate=covariate,
    )


def _chain_graph(path, n_channels):
    """Channels in a line: each touches its neighbors."""
    indices = [[c - 1, c + 1] for c in range(n_channels)]
    indices = [[j for j in row if 0 <= j < n_channels] for row in indices]
    indptr = np.cumsum([0] + [len(row) for row in indices]).astype(np.int32)
    save_npz(path, indptr=indptr, indices=np.concatenate(indices).astype(np.int32))
    return path


def _run(subjects, graph, settings):
    """Every shard of a calibration, merged."""
    shards = [calibration_shard(subjects, graph, shard=k, settings=settings) for k in range(settings.shards)]
    return shards, merge_shards(shards, datasets=settings.datasets)


def _upper_bound_holds(detections, datasets, alpha, confidence=0.99):
    """FWER <= alpha is not rejected: the Clopper-Pearson interval reaches down to alpha."""
    low = scipy.stats.binomtest(detections, datasets).proportion_ci(confidence_level=confidence, method="exact").low
    return low <= alpha


# ---- null datasets -------------------------------------------------------------------------------


def test_sign_flip_dataset_flips_whole_maps():
    rng = np.random.default_rng(0)
    data = _contrast(_smooth_maps(rng, 9))
    flipped = null_dataset(data, dataset_rng(5, "c1", 0))
    ratio = flipped / data.x
    assert np.allclose(np.abs(ratio), 1)
    assert np.all(ratio == ratio[:, :1])  # one sign per subject: smoothness kept
    assert flipped.dtype == data.x.dtype


def test_label_and_covariate_datasets_reorder_subjects():
    rng = np.random.default_rng(1)
    x = _smooth_maps(rng, 10)
    for test, extra in (
        ("two-sample", {"groups": np.array([0] * 5 + [1] * 5)}),
        ("correlation", {"covariate": np.arange(10.0)}),
    ):
        shuffled = null_dataset(_contrast(x, test=test, **extra), dataset_rng(5, "c1", 3))
        match = [int(np.flatnonzero((x == row).all(axis=1))[0]) for row in shuffled]
        assert sorted(match) == list(range(10)) and match != list(range(10))


def test_repeated_measures_dataset_shuffles_conditions_within_subject():
    rng = np.random.default_rng(2)
    x = _smooth_maps(rng, 6, k=3)
    shuffled = null_dataset(_contrast(x, test="repeated-measures"), dataset_rng(5, "c1", 1))
    for subject in range(6):
        assert sorted(map(bytes, shuffled[subject])) == sorted(map(bytes, x[subject]))
    assert not np.array_equal(shuffled, x)


def test_dataset_stream_depends_on_seed_contrast_and_index_only():
    rng = np.random.default_rng(3)
    data = _contrast(_smooth_maps(rng, 12))
    first = null_dataset(data, dataset_rng(5, "c1", 7))
    assert np.array_equal(first, null_dataset(data, dataset_rng(5, "c1", 7)))
    assert not np.array_equal(first, null_dataset(data, dataset_rng(6, "c1", 7)))
    assert not np.array_equal(first, null_dataset(data, dataset_rng(5, "c2", 7)))


# ---- error rates -------------------------------------------------------------------------------------


def test_uncorrected_fwer_matches_independent_points(tmp_path):
    # 20 independent Gaussian points: FWER = 1 - (1 - alpha)^m = 0.6415141 (common practice, no source).
    rng = np.random.default_rng(11)
    data = _contrast(rng.normal(size=(40, 20)).astype(np.float32), shape=(1, 4, 5))
    data.save(tmp_path / "subjects.npz")
    settings = _settings(_plan(tmp_path), datasets=400)
    _, merged = _run(tmp_path / "subjects.npz", None, settings)
    detections = int((merged["n_significant"][:, 0] > 0).sum())
    interval = scipy.stats.binomtest(detections, 400).proportion_ci(confidence_level=0.99, method="exact")
    assert interval.low <= 1 - 0.95**20 <= interval.high
    assert _upper_bound_holds(int((merged["n_significant"][:, 1] > 0).sum()), 400, 0.05)  # Bonferroni


def _fwer_check(tmp_path, *, n_subjects, permutations, datasets, seed):
    rng = np.random.default_rng(seed)
    data = _contrast(_smooth_maps(rng, n_subjects))
    data.save(tmp_path / "subjects.npz")
    graph = _chain_graph(tmp_path / "graph.npz", 4)
    plan = _plan(tmp_path, corrections=FWER_CORRECTIONS, permutations=permutations, seed=seed)
    settings = _settings(plan, datasets=datasets, shards=2)
    shards, merged = _run(tmp_path / "subjects.npz", graph, settings)
    detected = merged["n_significant"] > 0
    labels = [str(label) for label in merged["labels"]]
    assert labels == ["uncorrected", "bonferroni", "holm", "max-stat", "step-down", "cluster", "tfce"]
    # Smooth maps of 240 points: far more false positives than alpha without correction (common practice).
    assert scipy.stats.binomtest(int(detected[:, 0].sum()), datasets, 0.05, alternative="greater").pvalue < 1e-6
    for column, label in enumerate(labels[1:], start=1):
        # Each correction controls the FWER at alpha: binomial bound (Clopper & Pearson 1934).
        assert _upper_bound_holds(int(detected[:, column].sum()), datasets, 0.05), label
    return shards, settings


def test_corrections_control_fwer_on_smooth_null_maps_exact_table(tmp_path):
    # 7 subjects, 127 permutations: all 2^7 sign flips are enumerated, so the permutation corrections'
    # FWER under random sign flips is at most alpha exactly (Nichols & Holmes 2002).
    _fwer_check(tmp_path, n_subjects=7, permutations=127, datasets=40, seed=21)


@pytest.mark.slow
def test_corrections_control_fwer_on_smooth_null_maps_large(tmp_path):
    _fwer_check(tmp_path, n_subjects=14, permutations=199, datasets=600, seed=22)


def test_result_is_the_same_for_1_or_4_shards_and_reproducible(tmp_path):
    rng = np.random.default_rng(4)
    _contrast(_smooth_maps(rng, 8)).save(tmp_path / "subjects.npz")
    graph = _chain_graph(tmp_path / "graph.npz", 4)
    plan = _plan(tmp_path, corrections="- method: holm\n- method: max-stat\n- method: tfce\n", permutations=31)
    one = _run(tmp_path / "subjects.npz", graph, _settings(plan, datasets=10, shards=1))[1]
    four_shards, four = _run(tmp_path / "subjects.npz", graph, _settings(plan, datasets=10, shards=4))
    assert [c["datasets"].tolist() for c in four_shards] == [[0, 1, 2], [3, 4, 5], [6, 7, 8], [9]]
    assert np.array_equal(one["n_significant"], four["n_significant"])
    again = _run(tmp_path / "subjects.npz", graph, _settings(plan, datasets=10, shards=4))[1]
    assert np.array_equal(again["n_significant"], four["n_significant"])
    other = _run(
        tmp_path / "subjects.npz",
        graph,
        _settings(
            _plan(
                tmp_path, corrections="- method: holm\n- method: max-stat\n- method: tfce\n", permutations=31, seed=4
            ),
            datasets=10,
        ),
    )[1]
    assert not np.array_equal(other["n_significant"], one["n_significant"])


@pytest.mark.parametrize(
    "test,extra",
    [
        ("two-sample", {"groups": np.array([0] * 5 + [1] * 5)}),
        ("correlation", {"covariate": np.linspace(-1, 1, 10)}),
        ("repeated-measures", {}),
    ],
)
def test_other_designs_run_every_correction(tmp_path, test, extra):
    rng = np.random.default_rng(5)
    x = _smooth_maps(rng, 10, k=3 if test == "repeated-measures" else None)
    _contrast(x, test=test, **extra).save(tmp_path / "subjects.npz")
    plan = _plan(
        tmp_path,
        corrections="- method: fdr-bh\n- method: max-stat\n- method: cluster\n  dims: [freq, time]\n",
        permutations=19,
    )
    _, merged = _run(tmp_path / "subjects.npz", None, _settings(plan, datasets=6))
    assert merged["n_significant"].shape == (6, 4)
    assert (merged["n_significant"][:, 0] > 0).any()  # uncorrected finds something in 240 smooth points


# ---- table, figure, report ---------------------------------------------------------------------------


def test_fwer_interval_is_clopper_pearson():
    # k = 0: upper = 1 - (0.025)^(1/n) in closed form (Clopper & Pearson 1934).
    assert fwer_interval(0, 20) == (0.0, pytest.approx(1 - 0.025 ** (1 / 20), rel=1e-9))
    # General k: beta quantiles (Clopper & Pearson 1934), checked with scipy.stats.beta.
    low, high = fwer_interval(7, 50)
    assert low == pytest.approx(scipy.stats.beta.ppf(0.025, 7, 44), rel=1e-9)
    assert high == pytest.approx(scipy.stats.beta.ppf(0.975, 8, 43), rel=1e-9)


def test_summarize_writes_table_sidecar_figure_and_report_section(tmp_path):
    rng = np.random.default_rng(6)
    _contrast(_smooth_maps(rng, 8)).save(tmp_path / "subjects.npz")
    plan = _plan(
        tmp_path,
        corrections="- method: bonferroni\n- method: fdr-bh\n  level: 0.1\n- method: max-stat\n",
        permutations=31,
    )
    settings = _settings(plan, datasets=6, shards=2, permutations=15)
    files = []
    for k in range(2):
        save_npz(
            tmp_path / f"shard-{k}.npz",
            **calibration_shard(tmp_path / "subjects.npz", None, shard=k, settings=settings),
        )
        files.append(tmp_path / f"shard-{k}.npz")
    out = tmp_path / "output" / "calibration" / "c1.tsv"
    contrast = tmp_path / "output" / "contrasts" / "c1"
    contrast.mkdir(parents=True)
    _contrast(_smooth_maps(np.random.default_rng(6), 8)).save(contrast / "subjects.npz")  # the same maps
    save_npz(contrast / "observed.npz", stat=np.arange(6.0))
    current = {"c1": [c.record() for c in settings.corrections]}  # as the result files record them
    assert calibration_section_html(tmp_path / "output", current) is None
    rows = summarize(
        files, out, settings=settings, subjects=contrast / "subjects.npz", observed=contrast / "observed.npz"
    )
    table = read_table(out)
    assert [r["correction"] for r in table] == ["uncorrected", "bonferroni", "fdr-bh", "max-stat"]
    assert [r["nominal"] for r in table] == [0.05, 0.05, 0.1, 0.05]
    assert [r["permutations"] for r in table] == ["n/a", "n/a", "n/a", 15.0]
    for row, written in zip(rows, table):
        assert written["fwer"] == pytest.approx(row.detections / 6, abs=1e-6)
        assert written["mean_fdp"] == written["fwer"]
        assert written["fwer_ci_low"] <= written["fwer"] <= written["fwer_ci_high"]
    sidecar = json.loads(out.with_suffix(".json").read_text())
    assert sidecar["Calibration"]["permutations_reduced"] is True
    assert sidecar["Calibration"]["study_permutations"] == 31
    assert set(sidecar) >= {"fwer", "fwer_ci_low", "mean_fdp", "nominal"}
    assert out.with_suffix(".png").read_bytes()[:4] == b"\x89PNG"
    assert out.with_suffix(".svg").is_file()
    section = calibration_section_html(tmp_path / "output", current)
    assert "<table" in section and "data:image/png;base64," in section
    assert "15 permutations" in section and "fdr-bh" in section
    stale = "computed before the latest change"
    assert stale not in section
    # rewritten with the same contents (a rerun): still current
    save_npz(contrast / "observed.npz", stat=np.arange(6.0))
    assert stale not in calibration_section_html(tmp_path / "output", current)
    # other statistics, or other corrections, than the calibration saw: the report says so
    assert stale in calibration_section_html(tmp_path / "output", {"c1": current["c1"][:2]})
    save_npz(contrast / "observed.npz", stat=np.arange(6.0) + 1)
    assert stale in calibration_section_html(tmp_path / "output", current)


def test_merge_refuses_missing_datasets(tmp_path):
    rng = np.random.default_rng(7)
    _contrast(_smooth_maps(rng, 6)).save(tmp_path / "subjects.npz")
    settings = _settings(_plan(tmp_path), datasets=4, shards=2)
    part = calibration_shard(tmp_path / "subjects.npz", None, shard=0, settings=settings)
    with pytest.raises(UserError, match=r"the shard files hold 2 datasets, expected datasets 0 to 3 once each"):
        merge_shards([part], datasets=4)


@pytest.mark.parametrize(
    "options,message",
    [
        ({"datasets": 0, "shards": 1}, r"--datasets must be a whole number of at least 1, got 0"),
        ({"datasets": 5, "shards": 6}, r"--shards must be between 1 and the number of datasets \(5\), got 6"),
        (
            {"datasets": 5, "shards": 1, "permutations": 0},
            r"--permutations must be a whole number of at least 1, got 0",
        ),
    ],
)
def test_bad_options_are_user_errors(tmp_path, options, message):
    plan = _plan(tmp_path)
    with pytest.raises(UserError, match=message):
        calibration_settings(plan, "c1", permutations=options.pop("permutations", None), **options)


def test_uncorrected_reference_is_parametric_p_at_alpha(tmp_path):
    rng = np.random.default_rng(8)
    data = _contrast(rng.normal(size=(10, 20)).astype(np.float32), shape=(1, 4, 5))
    data.save(tmp_path / "subjects.npz")
    settings = _settings(_plan(tmp_path), datasets=3)
    part = calibration_shard(tmp_path / "subjects.npz", None, shard=0, settings=settings)
    for row, index in enumerate(part["datasets"]):
        x = null_dataset(data, dataset_rng(settings.nulls.seed, "c1", int(index))).astype(np.float64)
        p = scipy.stats.ttest_1samp(x, 0.0).pvalue  # reference: scipy.stats.ttest_1samp
        assert part["n_significant"][row, 0] == np.count_nonzero(p <= 0.05)
        assert part["n_significant"][row, 1] == np.count_nonzero(p <= 0.05 / 20)  # Bonferroni (common practice)
    assert math.isclose(float(part["detected"].mean()), float((part["n_significant"] > 0).mean()))


def test_summarize_refuses_shards_from_other_settings(tmp_path):
    rng = np.random.default_rng(9)
    _contrast(_smooth_maps(rng, 6)).save(tmp_path / "subjects.npz")
    plan = _plan(tmp_path)
    old = _settings(plan, datasets=2, shards=1)
    save_npz(tmp_path / "shard-0.npz", **calibration_shard(tmp_path / "subjects.npz", None, shard=0, settings=old))
    with pytest.raises(
        UserError, match=r"shard-0.npz was computed with other calibration settings; delete it and rerun"
    ):
        summarize(
            [tmp_path / "shard-0.npz"],
            tmp_path / "c1.tsv",
            settings=_settings(plan, datasets=2, shards=1, permutations=7),
            subjects=tmp_path / "subjects.npz",
            observed=tmp_path / "observed.npz",
        )


def test_calibrate_warns_when_the_interval_is_too_wide_for_a_conclusion():
    from famwise.calibrate_command import wide_interval_warnings

    few = {
        "correction": "holm",
        "fwer": 0.3,
        "fwer_ci_low": 0.067,
        "fwer_ci_high": 0.652,
        "nominal": 0.05,
        "datasets": 10,
    }
    many = {
        "correction": "holm",
        "fwer": 0.05,
        "fwer_ci_low": 0.016,
        "fwer_ci_high": 0.113,
        "nominal": 0.05,
        "datasets": 100,
    }
    tight = {
        "correction": "holm",
        "fwer": 0.05,
        "fwer_ci_low": 0.031,
        "fwer_ci_high": 0.076,
        "nominal": 0.05,
        "datasets": 400,
    }
    (message,) = wide_interval_warnings([few])
    # 4 * 1.96^2 * (1 - 0.05) / 0.05 = 291.9 datasets (normal approximation, common practice)
    assert "correction holm: the 95% interval [0.067, 0.652]" in message and "--datasets 292 (now 10)" in message
    assert wide_interval_warnings([many]) == [] and wide_interval_warnings([tight]) == []


@pytest.mark.parametrize("profile", ["slurm", "local"])
def test_calibrate_passes_the_profile_to_snakemake(tmp_path, monkeypatch, capsys, profile):
    # as `famwise run` and `famwise power` do: the resolved profile folder reaches Snakemake's options
    from pathlib import Path

    import famwise.calibrate_command
    from famwise.cli import main

    from conftest import write_tiny_study

    spec = write_tiny_study(tmp_path)
    calls = []
    monkeypatch.setattr(
        famwise.calibrate_command, "run_snakemake", lambda plan, options, **kw: calls.append(options) or (1, [])
    )
    monkeypatch.setattr(famwise.calibrate_command, "job_error", lambda plan, started: None)
    folder = Path(__file__).resolve().parents[1] / "configs" / "profiles" / profile
    assert main(["calibrate", str(spec), "--datasets", "4", "--cores", "3", "--profile", str(folder)]) == 1
    assert calls[0][:4] == ["--cores", "3", "--profile", str(folder)]
    assert calls[0][4:] and all(target.startswith("calibration/") for target in calls[0][4:])
    assert main(["calibrate", str(spec), "--profile", str(tmp_path / "nowhere")]) == 2
    assert f"--profile {tmp_path / 'nowhere'}: no such profile folder" in capsys.readouterr().err
