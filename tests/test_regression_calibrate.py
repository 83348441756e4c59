"""Calibration of the regression design: Freedman-Lane null datasets and the family-wise error on them."""

import textwrap

import numpy as np
import scipy.stats
from scipy.ndimage import gaussian_filter

from famwise.calibrate import calibration_settings
from famwise.calibrate.datasets import calibration_shard, dataset_rng, null_dataset
from famwise.calibrate.table import merge_shards
from famwise.design import ContrastData
from famwise.plan import Plan
from famwise.spec import load_study

SPEC = """\
version: 1
name: regression calibration
seed: 5
subjects: {source: epochs, path: "data/sub-{subject}.npz"}
conditions: {a: [a]}
contrasts:
  - {name: c1, test: regression, conditions: [a], covariate: age, nuisance: [site]}
inference:
  alpha: 0.05
  permutations: 99
  corrections:
    - method: max-stat
    - method: cluster
      forming_p: 0.05
      dims: [freq, time]
"""


def _regression_data(seed: int, n: int = 12, shape=(2, 5, 12)) -> ContrastData:
    """Smooth null maps with a strong site effect and none of age (invented data)."""
    rng = np.random.default_rng(seed)
    noise = gaussian_filter(rng.normal(size=(n, *shape)), sigma=(0, 0, 0.6, 1.5)).reshape(n, -1)
    age = rng.uniform(20, 70, n)
    site = (np.arange(n) % 3 == 0).astype(float)
    x = noise + 2.0 * site[:, None]
    return ContrastData(
        x=x.astype(np.float32),
        test="regression",
        subjects=tuple(f"s{i}" for i in range(n)),
        channels=tuple(f"ch{i}" for i in range(shape[0])),
        freqs=np.linspace(4, 12, shape[1]),
        times=np.arange(shape[2]) / 50,
        covariate=age,
        nuisance=site[:, None],
        nuisance_columns=("site=B",),
        design_terms=("age (numeric)", "site (categorical, indicator columns for B; reference level A)"),
    )


def test_null_dataset_is_the_nuisance_fit_plus_shuffled_residuals():
    data = _regression_data(1)
    x0 = null_dataset(data, dataset_rng(5, "c1", 0)).astype(np.float64)
    design = np.column_stack([np.ones(12), data.nuisance])
    fit = design @ np.linalg.lstsq(design, data.x.astype(np.float64), rcond=None)[0]
    # The reduced model's fit plus its residuals in a shuffled order (Freedman & Lane 1983).
    original, shuffled = data.x - fit, x0 - fit
    order = [int(np.argmin(np.abs(original - row).sum(axis=1))) for row in shuffled]
    np.testing.assert_allclose(shuffled, original[order], atol=1e-5)
    assert sorted(order) == list(range(12)) and order != list(range(12))


def test_max_statistic_and_cluster_fwer_within_the_binomial_bound(tmp_path):
    (tmp_path / "study.yaml").write_text(textwrap.dedent(SPEC))
    plan = Plan(load_study(tmp_path / "study.yaml"))
    _regression_data(2).save(tmp_path / "subjects.npz")
    settings = calibration_settings(plan, "c1", datasets=60, permutations=None, shards=2)
    shards = [calibration_shard(tmp_path / "subjects.npz", None, shard=k, settings=settings) for k in range(2)]
    merged = merge_shards(shards, datasets=60)
    assert [str(label) for label in merged["labels"]] == ["uncorrected", "max-stat", "cluster"]
    detected = merged["n_significant"] > 0
    assert detected[:, 0].sum() > 3 * 0.05 * 60  # 120 smooth points: uncorrected is far above alpha
    for column in (1, 2):
        # FWER <= alpha not rejected: the exact binomial interval reaches alpha (Clopper & Pearson 1934).
        interval = scipy.stats.binomtest(int(detected[:, column].sum()), 60).proportion_ci(confidence_level=0.99)
        assert interval.low <= 0.05
