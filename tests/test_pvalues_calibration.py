"""False discovery proportion of Benjamini-Hochberg on independent points, simulated.

Subjects' maps are independent Gaussian noise at every point, with a true effect at a tenth of the points;
the statistic is the one-sample t with its parametric p-value.
"""

import numpy as np
import pytest
import scipy.stats

from famwise.correct.pvalues import adjust

Q = 0.1


def _false_discovery_proportions(n_datasets, n_points, n_subjects, effect, seed):
    """FDP of BH at level Q per dataset; the first tenth of the points carry ``effect`` (in SD units)."""
    rng = np.random.default_rng(seed)
    n_true = n_points // 10
    proportions = np.empty(n_datasets)
    for k in range(n_datasets):
        data = rng.standard_normal((n_subjects, n_points))
        data[:, :n_true] += effect
        t = data.mean(axis=0) / (data.std(axis=0, ddof=1) / np.sqrt(n_subjects))
        p = 2 * scipy.stats.t.sf(np.abs(t), df=n_subjects - 1)
        mask = adjust(p, method="fdr-bh", alpha=Q).mask
        proportions[k] = mask[n_true:].sum() / max(1, mask.sum())
    return proportions


def _check(proportions):
    # Source: Benjamini & Hochberg (1995): for independent tests E[FDP] = q m0 / m <= q. The mean over the
    # datasets must not exceed q by more than a one-sided 95% normal bound (common practice).
    bound = Q + 1.645 * proportions.std(ddof=1) / np.sqrt(proportions.size)
    assert proportions.mean() <= bound, f"mean FDP {proportions.mean():.4f} above {bound:.4f}"
    # Discoveries are made and some are false, so the check is not vacuous.
    assert 0.5 * Q * 0.9 < proportions.mean()


def test_bh_false_discovery_proportion_small():
    _check(_false_discovery_proportions(300, n_points=400, n_subjects=12, effect=1.2, seed=1995))


@pytest.mark.slow
def test_bh_false_discovery_proportion_large():
    _check(_false_discovery_proportions(4000, n_points=2000, n_subjects=16, effect=1.0, seed=2001))
