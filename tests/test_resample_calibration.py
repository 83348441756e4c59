"""Error rates under the null: per-point rate ~ alpha, uncorrected FWER over m points ~ 1 - (1 - alpha)^m."""

import numpy as np
import pytest
from scipy import stats as sps

from famwise.nulls.collectors.exceedance import ExceedanceCollector, permutation_p
from famwise.nulls.engine import run_shard
from famwise.nulls.tables import make_table
from famwise.stats import compute

ALPHA = 0.05
M = 20


def null_rejections(options, n_subjects, n_datasets, permutations, seed):
    """Parametric and permutation rejections (n_datasets, M) on pure-noise data."""
    rng = np.random.default_rng(seed)
    k = 3 if options["test"] == "repeated-measures" else None
    parametric, permutation = [], []
    for d in range(n_datasets):
        shape = (n_subjects, k, M) if k else (n_subjects, M)
        x = rng.standard_normal(shape)
        table = make_table(
            options["test"],
            n_subjects=n_subjects,
            permutations=permutations,
            seed=seed + d,
            groups=options.get("groups"),
            n_conditions=k,
        )
        observed = compute(x, **options)
        arrays = run_shard(
            x, table.rows, collectors=[ExceedanceCollector(observed.stat, tail=observed.effective_tail)], **options
        )
        parametric.append(observed.p <= ALPHA)
        permutation.append(permutation_p(arrays["exceed.count"], table.n_rows) <= ALPHA)
    return np.array(parametric), np.array(permutation)


def assert_calibrated(rejected):
    n_datasets = rejected.shape[0]
    # per point: binomial 99.9% interval around alpha (scipy.stats.binom; common practice)
    lo, hi = sps.binom.interval(0.999, rejected.size, ALPHA)
    assert lo <= rejected.sum() <= hi, rejected.mean()
    # uncorrected FWER over M independent points: 1 - (1 - alpha)^M = 0.6415141 for M = 20 (common practice, no source)
    fwer = 1 - (1 - ALPHA) ** M
    assert fwer == pytest.approx(0.6415141, abs=1e-7)
    lo, hi = sps.binom.interval(0.999, n_datasets, fwer)
    assert lo <= rejected.any(axis=1).sum() <= hi, rejected.any(axis=1).mean()


def test_one_sample_null_calibration():
    parametric, permutation = null_rejections(dict(test="one-sample"), 12, 200, 199, seed=100)
    assert_calibrated(parametric)
    assert_calibrated(permutation)


@pytest.mark.slow
@pytest.mark.parametrize(
    "options",
    [
        dict(test="one-sample", statistic="yuen"),
        dict(test="two-sample", groups=np.r_[np.zeros(7, int), np.ones(9, int)], equal_var=False),
        dict(test="two-sample", groups=np.r_[np.zeros(7, int), np.ones(9, int)], statistic="yuen"),
        dict(test="correlation", covariate=np.linspace(-1, 1, 16) ** 3),
        dict(test="repeated-measures"),
    ],
    ids=["yuen", "welch", "two-sample-yuen", "correlation", "repeated-measures"],
)
def test_null_calibration_all_designs(options):
    parametric, permutation = null_rejections(options, 16, 1000, 399, seed=200)
    assert_calibrated(parametric)
    assert_calibrated(permutation)
