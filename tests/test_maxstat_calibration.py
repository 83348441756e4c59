"""Family-wise error under the null: Bonferroni, Holm and max-statistic on smooth random maps.

Each dataset is a group of subjects with smooth Gaussian noise maps and no effect. The statistic is the
one-sample t, its null comes from random sign flips (row 0 the identity), computed here with numpy so that
the test does not depend on famwise's resampling module. A method fails when the number of datasets with
at least one rejection exceeds the upper 95% binomial bound for a true rate of alpha.
"""

import numpy as np
import pytest
import scipy.ndimage
import scipy.stats

from famwise.correct.maxstat import single_step, step_down
from famwise.correct.pvalues import adjust
from famwise.nulls.collectors.maxima import MaxStatCollector, StepDownCollector

ALPHA = 0.05


def _sign_flip_t(data, flips):
    """One-sample t maps (n_flips, n_points) of sign-flipped subject maps ``data`` (n_subjects, n_points)."""
    n = data.shape[0]
    flipped_sum = flips @ data
    variance = (np.sum(data**2, axis=0) - flipped_sum**2 / n) / (n - 1)
    return flipped_sum / n / np.sqrt(variance / n)


def _family_wise_errors(n_datasets, shape, n_subjects, n_rows, seed):
    """Number of datasets with at least one rejection, per method, under the complete null."""
    rng = np.random.default_rng(seed)
    errors = dict.fromkeys(["bonferroni", "holm", "max-stat", "max-stat-step-down"], 0)
    for _ in range(n_datasets):
        noise = rng.standard_normal((n_subjects, *shape))
        smooth = scipy.ndimage.gaussian_filter(noise, sigma=(0, 2.0, 3.0), mode="reflect")
        data = smooth.reshape(n_subjects, -1)
        flips = rng.choice(np.array([-1.0, 1.0]), size=(n_rows, n_subjects))
        flips[0] = 1.0
        table = _sign_flip_t(data, flips)
        observed = table[0]
        p = 2 * scipy.stats.t.sf(np.abs(observed), df=n_subjects - 1)
        maxima, steps = MaxStatCollector(tail="two-sided"), StepDownCollector(observed, tail="two-sided")
        for block in np.array_split(table, 4):
            maxima.update(block)
            steps.update(block)
        results = [
            adjust(p, method="bonferroni", alpha=ALPHA),
            adjust(p, method="holm", alpha=ALPHA),
            single_step(observed, maxima.arrays()["maxstat.max"], tail="two-sided", alpha=ALPHA),
            step_down(observed, steps.arrays()["stepdown.count"], n_rows, tail="two-sided", alpha=ALPHA),
        ]
        for result in results:
            errors[result.method] += result.n_significant > 0
    return errors


def _check(errors, n_datasets):
    # Source: binomial distribution (scipy.stats.binom.ppf), common practice: the count of family-wise errors
    # must not exceed the upper 95% bound for a rate of alpha.
    bound = scipy.stats.binom.ppf(0.95, n_datasets, ALPHA)
    for method, count in errors.items():
        assert count <= bound, f"{method}: {count} family-wise errors in {n_datasets} datasets (bound {bound:g})"
    # Max-statistic is not conservative like Bonferroni on smooth maps: it makes some errors.
    assert errors["max-stat"] > 0
    assert errors["max-stat-step-down"] == errors["max-stat"]  # the top point decides both (weak control)


def test_family_wise_error_under_null_small():
    n_datasets = 200
    _check(_family_wise_errors(n_datasets, shape=(8, 25), n_subjects=12, n_rows=200, seed=1979), n_datasets)


@pytest.mark.slow
def test_family_wise_error_under_null_large():
    n_datasets = 2000
    _check(_family_wise_errors(n_datasets, shape=(20, 60), n_subjects=16, n_rows=500, seed=1993), n_datasets)
