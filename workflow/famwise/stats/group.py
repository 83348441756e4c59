"""Observed group statistics per point, with parametric p and effect sizes.

Data shapes (points flattened to P = n_channels * n_freqs * n_times, C order):

- ``"one-sample"`` and ``"paired"``: x (n, P); paired data are the
  per-subject differences A - B (the paired test is the one-sample test on
  differences, for t and for Yuen).
- ``"two-sample"``: x (n, P) with ``groups`` int (n,) of 0/1; the statistic
  is group 0 minus group 1.
- ``"weighted"``: x (n, P), each subject's weighted sum of conditions; the
  one-sample test (t and Yuen).
- ``"between-groups"``: x (n, P) with ``groups`` int (n,) of 0 .. k - 1,
  k >= 3; one-way between-subject F (`famwise.stats.between`).
- ``"repeated-measures"``: x (n, k, P) with k >= 3 conditions; F statistic.
- ``"correlation"``: x (n, P) with ``covariate`` float (n,); Pearson r and
  its t transform r sqrt((n-2)/(1-r^2)), df n-2.
- ``"regression"``: x (n, P) with ``covariate`` float (n,), the tested
  covariate, and ``nuisance`` float (n, q) the coded nuisance columns; OLS t
  of the tested coefficient, df n - 2 - q (`famwise.stats.regression`).
"""

from dataclasses import dataclass

import numpy as np
from scipy import stats as sps

from famwise.errors import UserError
from famwise.stats.between import between_groups_f, check_group_labels
from famwise.stats.regression import check_regression, regression_t
from famwise.stats.trimmed import n_trimmed, one_sample_yuen, two_sample_yuen

TESTS = (
    "one-sample",
    "paired",
    "weighted",
    "two-sample",
    "between-groups",
    "repeated-measures",
    "correlation",
    "regression",
)
F_TESTS = ("between-groups", "repeated-measures")
"""Tests whose statistic is F (tested on its upper tail)."""
SIGN_FLIP_TESTS = ("one-sample", "paired", "weighted")
"""Tests of one value per subject against zero (sign flips)."""
STATISTICS = ("t", "yuen")
TAILS = ("two-sided", "greater", "less")
MIN_SUBJECTS = 3


@dataclass(frozen=True)
class GroupStatistic:
    """The observed statistic of one contrast at every point.

    Attributes
    ----------
    stat : ndarray of float64, shape (P,)
        t (one-sample, paired, weighted, two-sample, also Yuen's trimmed t), F
        (repeated measures, between groups), the t transform of r
        (correlation) or the OLS t of the tested coefficient (regression).
    p : ndarray of float64, shape (P,)
        Parametric p for ``effective_tail``.
    df : ndarray of float64
        Degrees of freedom: shape () for t, (P,) for Welch (and Yuen with
        unequal variances), (2,) (numerator, denominator) for F.
    effect : ndarray of float64, shape (P,)
        Mean (one-sample), mean difference (paired, two-sample), trimmed mean
        or trimmed-mean difference (Yuen), range of the condition means
        (largest minus smallest, repeated measures), range of the group means
        (between groups), r (correlation), the tested coefficient
        (regression: map unit per covariate unit).
    effect_size : ndarray of float64, shape (P,)
        d_z = mean / SD (one-sample, paired), Hedges' g (two-sample, with the
        small-sample factor 1 - 3 / (4 (n0 + n1) - 9)), partial eta squared
        (repeated measures), eta squared (between groups), r (correlation),
        the partial r given the nuisance covariates (regression). The Yuen option keeps these
        classical effect sizes.
    test, statistic, tail : str
        As requested.
    n : int
        Number of subjects.
    effective_tail : str
        The tail the p-values use: ``tail``, except ``"greater"`` for F (`F_TESTS`).
    """

    stat: np.ndarray
    p: np.ndarray
    df: np.ndarray
    effect: np.ndarray
    effect_size: np.ndarray
    test: str
    statistic: str
    n: int
    tail: str
    effective_tail: str


def compute(
    x,
    *,
    test: str,
    groups=None,
    covariate=None,
    statistic: str = "t",
    trim: float = 0.2,
    equal_var: bool = True,
    tail: str = "two-sided",
    nuisance=None,
) -> GroupStatistic:
    """Compute the group statistic at every point.

    Parameters
    ----------
    x : array_like, shape (n, P), or (n, k, P) for ``"repeated-measures"``
        Per-subject values (paired: differences A - B).
    test : str
        One of `TESTS`.
    groups : array_like of int, shape (n,), optional
        0/1 group labels (two-sample), 0 .. k - 1 (between-groups).
    covariate : array_like of float, shape (n,), optional
        Per-subject covariate (correlation; regression: the tested covariate).
    statistic : {"t", "yuen"}
        ``"yuen"``: trimmed means with Winsorized variances (one-sample,
        paired, two-sample only).
    trim : float
        Proportion trimmed from each tail for Yuen, 0 <= trim < 0.5.
    equal_var : bool
        Two-sample only: Student (pooled) when True, Welch when False.
    tail : {"two-sided", "greater", "less"}
        Alternative hypothesis; F is always tested on its upper tail.
    nuisance : array_like of float, shape (n, q), optional
        Coded nuisance covariates (regression only).

    Returns
    -------
    GroupStatistic

    References
    ----------
    Yuen KK (1974). Biometrika 61(1):165-170.
    Hedges LV (1981). J Educ Stat 6(2):107-128.
    """
    x, groups, covariate = check_design(
        x, test=test, groups=groups, covariate=covariate, statistic=statistic, trim=trim, nuisance=nuisance
    )
    _check_choice("tail", tail, TAILS)
    n = x.shape[0]
    with np.errstate(divide="ignore", invalid="ignore"):
        if test in SIGN_FLIP_TESTS:
            stat, df, effect, size = _one_sample(x, statistic, trim)
        elif test == "two-sample":
            stat, df, effect, size = _two_sample(x, groups, statistic, trim, equal_var)
        elif test == "repeated-measures":
            stat, df, effect, size = _repeated_measures(x)
        elif test == "regression":
            stat, df, effect, size = regression_t(x, covariate, check_regression(covariate, nuisance, n)[1])
        elif test == "between-groups":
            stat, df, effect, size = between_groups_f(x, groups)
        else:
            stat, df, effect, size = _correlation(x, covariate)
    effective_tail = "greater" if test in F_TESTS else tail
    if test in F_TESTS:
        p = sps.f.sf(stat, df[0], df[1])
    else:
        p = _t_p(stat, df, effective_tail)
    return GroupStatistic(
        stat=stat,
        p=p,
        df=np.asarray(df, dtype=np.float64),
        effect=effect,
        effect_size=size,
        test=test,
        statistic=statistic,
        n=n,
        tail=tail,
        effective_tail=effective_tail,
    )


def forming_threshold(forming_p: float, *, test: str, df, tail: str) -> float:
    """Cluster-forming threshold on the statistic from a p-value.

    Parameters
    ----------
    forming_p : float
        Per-point p-value that forms clusters, 0 < forming_p < 1.
    test : str
        One of `TESTS`.
    df : array_like
        ``GroupStatistic.df``. For F, (numerator, denominator). For a
        per-point df (Welch, Yuen with unequal variances) the median df over
        points (points without one left out) is used: any fixed threshold keeps permutation inference
        valid, the median gives the typical point's threshold.
    tail : {"two-sided", "greater", "less"}
        Two-sided splits forming_p over both tails (forming_p / 2 each).
        Ignored for F (upper tail).

    Returns
    -------
    float
        A positive magnitude thr: clusters form where stat > thr
        (``"greater"``, and F), stat < -thr (``"less"``), or both
        (``"two-sided"``).
    """
    _check_choice("test", test, TESTS)
    _check_choice("tail", tail, TAILS)
    if not 0.0 < forming_p < 1.0:
        raise UserError(f"the cluster-forming p must be between 0 and 1, got {forming_p}")
    df = np.asarray(df, dtype=np.float64)
    if test in F_TESTS:
        if df.shape != (2,):
            raise UserError(f"an F threshold needs df (numerator, denominator), got shape {df.shape}")
        return float(sps.f.isf(forming_p, df[0], df[1]))
    dof = float(np.nanmedian(df)) if df.ndim else float(df)  # points left out have no df
    per_tail = forming_p / 2.0 if tail == "two-sided" else forming_p
    return float(sps.t.isf(per_tail, dof))


def check_design(x, *, test, groups=None, covariate=None, statistic="t", trim=0.2, nuisance=None):
    """Check the data and design of one test; return clean arrays.

    Returns
    -------
    x : ndarray of float64, C-contiguous
    groups : ndarray of int64 or None
    covariate : ndarray of float64 or None

    Raises
    ------
    UserError
        With a message naming the setting, what was expected and what was found.
    """
    _check_choice("test", test, TESTS)
    _check_choice("statistic", statistic, STATISTICS)
    x = np.ascontiguousarray(x, dtype=np.float64)
    want = 3 if test == "repeated-measures" else 2
    if x.ndim != want:
        layout = "(subjects, conditions, points)" if want == 3 else "(subjects, points)"
        raise UserError(f"{test} data must be a {want}-D array {layout}, got shape {x.shape}")
    bad = ~np.isfinite(x)
    if bad.any():
        where = np.argwhere(bad)[0]
        raise UserError(
            f"the data contain {int(bad.sum())} non-finite values (NaN or inf); "
            f"the first is at subject index {where[0]}, position {tuple(int(i) for i in where[1:])}"
        )
    n = x.shape[0]
    if n < MIN_SUBJECTS:
        raise UserError(f"the {test} test needs at least {MIN_SUBJECTS} subjects, got {n}")
    if statistic == "yuen" and test not in (*SIGN_FLIP_TESTS, "two-sample"):
        raise UserError(
            f"statistic 'yuen' is available for the one-sample, paired, weighted and two-sample tests, not '{test}'"
        )
    if statistic == "yuen" and not 0.0 <= trim < 0.5:
        raise UserError(f"`trim` must be at least 0 and below 0.5, got {trim}")
    if test == "repeated-measures" and x.shape[1] < 3:
        raise UserError(
            f"the repeated-measures test needs at least 3 conditions, got {x.shape[1]} (use the paired test for two)"
        )
    if test == "two-sample":
        groups = _check_groups(groups, n)
        if statistic == "yuen":
            for label in (0, 1):
                size = int(np.count_nonzero(groups == label))
                if size - 2 * n_trimmed(size, trim) < 2:
                    raise UserError(
                        f"trim {trim} leaves fewer than 2 of the {size} subjects of group {label}; "
                        "Yuen's test needs at least 2"
                    )
    elif test == "between-groups":
        groups = check_group_labels(groups, n)
    elif groups is not None:
        raise UserError(f"`groups` is only used by the two-sample test and the between-groups test, not by '{test}'")
    if test == "correlation":
        covariate = _check_covariate(covariate, n)
    elif test == "regression":
        covariate = check_regression(covariate, nuisance, n)[0]
    elif covariate is not None:
        raise UserError(f"`covariate` is only used by the correlation and regression tests, not by '{test}'")
    if nuisance is not None and test != "regression":
        raise UserError(f"`nuisance` is only used by the regression test, not by '{test}'")
    if statistic == "yuen" and test != "two-sample" and n - 2 * n_trimmed(n, trim) < 2:
        raise UserError(f"trim {trim} leaves fewer than 2 of the {n} subjects; Yuen's test needs at least 2")
    return x, groups, covariate


def _check_choice(name: str, value, allowed) -> None:
    if value not in allowed:
        raise UserError(f"`{name}` must be one of {', '.join(map(repr, allowed))}, got {value!r}")


def _check_groups(groups, n: int) -> np.ndarray:
    if groups is None:
        raise UserError("the two-sample test needs `groups` (one 0/1 label per subject)")
    groups = np.asarray(groups)
    if groups.shape != (n,):
        raise UserError(f"`groups` must hold one label per subject ({n}), got shape {groups.shape}")
    values = set(np.unique(groups).tolist())
    if not values <= {0, 1}:
        raise UserError(f"`groups` must hold labels 0 and 1, found {sorted(values)}")
    groups = groups.astype(np.int64)
    for label in (0, 1):
        size = int(np.count_nonzero(groups == label))
        if size == 0:
            raise UserError(f"the two-sample test needs subjects in groups 0 and 1; group {label} has none")
        if size < MIN_SUBJECTS:
            raise UserError(
                f"group {label} has {size} subject{'' if size == 1 else 's'}; the two-sample test needs at least {MIN_SUBJECTS} per group"
            )
    return groups


def _check_covariate(covariate, n: int) -> np.ndarray:
    if covariate is None:
        raise UserError("the correlation test needs `covariate` (one value per subject)")
    covariate = np.asarray(covariate, dtype=np.float64)
    if covariate.shape != (n,):
        raise UserError(f"`covariate` must hold one value per subject ({n}), got shape {covariate.shape}")
    if not np.isfinite(covariate).all():
        raise UserError(f"`covariate` must be finite, found {covariate[~np.isfinite(covariate)][0]}")
    if np.ptp(covariate) == 0:
        raise UserError(f"`covariate` is the same for every subject ({covariate[0]}); a correlation needs it to vary")
    return covariate


def _t_p(stat: np.ndarray, df, tail: str) -> np.ndarray:
    if tail == "greater":
        return sps.t.sf(stat, df)
    if tail == "less":
        return sps.t.cdf(stat, df)
    return np.minimum(2.0 * sps.t.sf(np.abs(stat), df), 1.0)


def _one_sample(x, statistic, trim):
    n = x.shape[0]
    mean = x.mean(axis=0)
    sd = x.std(axis=0, ddof=1)
    d_z = mean / sd
    if statistic == "yuen":
        t, mean_t, df = one_sample_yuen(x, trim)
        return t, np.asarray(df), mean_t, d_z
    return mean / (sd / np.sqrt(n)), np.asarray(float(n - 1)), mean, d_z


def _two_sample(x, groups, statistic, trim, equal_var):
    a, b = x[groups == 0], x[groups == 1]
    na, nb = a.shape[0], b.shape[0]
    diff = a.mean(axis=0) - b.mean(axis=0)
    va, vb = a.var(axis=0, ddof=1), b.var(axis=0, ddof=1)
    pooled = ((na - 1) * va + (nb - 1) * vb) / (na + nb - 2)
    hedges_g = diff / np.sqrt(pooled) * (1.0 - 3.0 / (4.0 * (na + nb) - 9.0))
    if statistic == "yuen":
        t, diff_t, df = two_sample_yuen(a, b, trim, equal_var)
        return t, df, diff_t, hedges_g
    if equal_var:
        t = diff / np.sqrt(pooled * (1.0 / na + 1.0 / nb))
        return t, np.asarray(float(na + nb - 2)), diff, hedges_g
    sa, sb = va / na, vb / nb
    df = (sa + sb) ** 2 / (sa**2 / (na - 1) + sb**2 / (nb - 1))
    return diff / np.sqrt(sa + sb), df, diff, hedges_g


def _repeated_measures(x):
    n, k = x.shape[:2]
    within = x - x.mean(axis=1, keepdims=True)
    cond = within.mean(axis=0)
    ss_cond = n * np.sum(cond**2, axis=0)
    ss_error = np.sum(within**2, axis=(0, 1)) - ss_cond
    df = np.array([k - 1.0, (n - 1.0) * (k - 1.0)])
    f = (ss_cond / df[0]) / (ss_error / df[1])
    means = x.mean(axis=0)
    return f, df, means.max(axis=0) - means.min(axis=0), ss_cond / (ss_cond + ss_error)


def _correlation(x, covariate):
    n = x.shape[0]
    xc = x - x.mean(axis=0)
    cc = covariate - covariate.mean()
    r = (cc @ xc) / np.sqrt(np.sum(xc**2, axis=0) * np.sum(cc**2))
    r = np.clip(r, -1.0, 1.0)
    t = r * np.sqrt((n - 2) / (1.0 - r**2))
    return t, np.asarray(float(n - 2)), r, r.copy()
