"""Naive permutation nulls: build each permuted data set, recompute the statistic.

The oracle of the fast paths in `famwise.nulls.engine` and the baseline of
`famwise bench`. Statistics come from ``scipy.stats`` where it has them and
from the textbook formulas otherwise; nothing is shared with famwise.stats.
"""

import itertools

import numpy as np
from scipy import stats as sps


def permuted_design(x, row, *, test, groups=None, covariate=None):
    """The data set of one permutation-table row.

    Returns
    -------
    x : ndarray
        Sign-flipped (one-sample, paired, weighted) or with conditions permuted within
        subject (repeated measures); otherwise unchanged.
    groups, covariate : ndarray or None
        Permuted labels (two-sample, between-groups) or covariate (correlation).
    """
    x = np.asarray(x, dtype=np.float64)
    row = np.asarray(row)
    if test in ("one-sample", "paired", "weighted"):
        return x * row[:, None].astype(np.float64), None, None
    if test in ("two-sample", "between-groups"):
        return x, np.asarray(groups)[row], None
    if test == "correlation":
        return x, None, np.asarray(covariate, dtype=np.float64)[row]
    permuted = np.empty_like(x)
    for i in range(x.shape[0]):
        permuted[i] = x[i, row[i]]
    return permuted, None, None


def statistic_map(x, *, test, groups=None, covariate=None, statistic="t", trim=0.2, equal_var=True):
    """The statistic per point of one data set, float64 (P,)."""
    if test in ("one-sample", "paired", "weighted"):
        if statistic == "yuen":
            return one_sample_trimmed_t(x, trim)
        return sps.ttest_1samp(x, 0.0, axis=0).statistic
    if test == "two-sample":
        groups = np.asarray(groups)
        return sps.ttest_ind(
            x[groups == 0], x[groups == 1], axis=0, equal_var=equal_var, trim=trim if statistic == "yuen" else 0
        ).statistic
    if test == "between-groups":
        groups = np.asarray(groups)
        return sps.f_oneway(*[x[groups == g] for g in np.unique(groups)], axis=0).statistic
    if test == "correlation":
        n = x.shape[0]
        r = sps.pearsonr(np.broadcast_to(np.asarray(covariate)[:, None], x.shape), x, axis=0).statistic
        return r * np.sqrt((n - 2) / (1.0 - r**2))
    return repeated_measures_f(x)


def null_stats(x, rows, *, test, groups=None, covariate=None, statistic="t", trim=0.2, equal_var=True):
    """Statistic of every row, one permuted data set at a time, float64 (n_rows, P)."""
    out = []
    for row in rows:
        xp, gp, cp = permuted_design(x, row, test=test, groups=groups, covariate=covariate)
        out.append(
            statistic_map(xp, test=test, groups=gp, covariate=cp, statistic=statistic, trim=trim, equal_var=equal_var)
        )
    return np.array(out)


def one_sample_trimmed_t(x, trim):
    """Trimmed mean / (s_w / ((1 - 2 trim) sqrt(n))) per column (Tukey & McLaughlin 1963)."""
    n = x.shape[0]
    g = int(trim * n)
    s = np.sort(x, axis=0)
    mean_t = s[g : n - g].mean(axis=0)
    winsorized = s.copy()
    winsorized[:g] = s[g]
    winsorized[n - g :] = s[n - g - 1]
    se = winsorized.std(axis=0, ddof=1) / ((1 - 2 * trim) * np.sqrt(n))
    return mean_t / se


def repeated_measures_f(x):
    """One-way repeated-measures F per point from the sums of squares, x (n, k, P)."""
    n, k = x.shape[:2]
    grand = x.mean(axis=(0, 1))
    ss_conditions = n * ((x.mean(axis=0) - grand) ** 2).sum(axis=0)
    ss_subjects = k * ((x.mean(axis=1) - grand) ** 2).sum(axis=0)
    ss_total = ((x - grand) ** 2).sum(axis=(0, 1))
    ss_error = ss_total - ss_conditions - ss_subjects
    return (ss_conditions / (k - 1)) / (ss_error / ((n - 1) * (k - 1)))


def weighted_sums(maps, weights):
    """Each subject's weighted sum of its condition maps, one subject and condition at a time.

    Parameters
    ----------
    maps : array_like, shape (n, k, P)
    weights : sequence of float, length k

    Returns
    -------
    ndarray of float64, shape (n, P)
    """
    maps = np.asarray(maps, dtype=np.float64)
    out = np.zeros((maps.shape[0], maps.shape[2]))
    for i in range(maps.shape[0]):
        for j, w in enumerate(weights):
            out[i] += w * maps[i, j]
    return out


def distinct_label_assignments(groups) -> set[tuple[int, ...]]:
    """Every distinct label vector with the group sizes of ``groups``, from all n! orders of the labels."""
    return set(itertools.permutations(np.asarray(groups).tolist()))
