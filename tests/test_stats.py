"""Observed group statistics: values against scipy, statsmodels and published formulas."""

import numpy as np
import pytest
from scipy import stats as sps
from scipy.stats import mstats

from famwise.errors import UserError
from famwise.stats import compute, forming_threshold


def col(values):
    return np.asarray(values, dtype=float)[:, None]


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


# --- one-sample and paired t ------------------------------------------------


def test_one_sample_t():
    # scipy.stats.ttest_1samp: t = 3 sqrt(2), df 4, p 0.01323560
    res = compute(col([1, 2, 3, 4, 5]), test="one-sample")
    assert res.stat[0] == pytest.approx(3 * np.sqrt(2), rel=1e-12)
    assert res.p[0] == pytest.approx(0.01323560, rel=1e-6)
    assert res.df.shape == () and float(res.df) == 4
    assert res.effect[0] == 3.0
    # d_z = mean / SD (ddof 1): common practice, no source
    assert res.effect_size[0] == pytest.approx(3 / np.std([1, 2, 3, 4, 5], ddof=1))


def test_paired_equals_one_sample_on_differences():
    a, b = np.array([2, 4, 5, 4, 8.0]), np.array([1, 2, 3, 4, 5.0])
    res = compute(col(a - b), test="paired")
    # scipy.stats.ttest_rel: t 3.1378582, p 0.03491971
    assert res.stat[0] == pytest.approx(3.1378582, rel=1e-7)
    assert res.p[0] == pytest.approx(0.03491971, rel=1e-6)
    ref = sps.ttest_rel(a, b)  # scipy.stats.ttest_rel
    assert res.stat[0] == pytest.approx(ref.statistic, rel=1e-12)


@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
def test_one_sample_many_points_equals_scipy(rng, tail):
    x = rng.standard_normal((17, 50)) + rng.normal(0, 0.5, 50)
    res = compute(x, test="one-sample", tail=tail)
    ref = sps.ttest_1samp(x, 0.0, axis=0, alternative=tail)  # scipy.stats.ttest_1samp
    np.testing.assert_allclose(res.stat, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.p, ref.pvalue, rtol=1e-10)
    assert res.effective_tail == tail


# --- two-sample t -------------------------------------------------------------


def test_two_sample_equal_sizes():
    x = col([1, 2, 3, 4, 5, 3, 4, 5, 6, 7])
    groups = np.r_[np.zeros(5, int), np.ones(5, int)]
    for equal_var in (True, False):
        res = compute(x, test="two-sample", groups=groups, equal_var=equal_var)
        # scipy.stats.ttest_ind: t = -2, df 8, p 0.08051624 (Welch identical)
        assert res.stat[0] == pytest.approx(-2.0, rel=1e-12)
        assert res.p[0] == pytest.approx(0.08051624, rel=1e-6)
        assert float(np.ravel(res.df)[0]) == pytest.approx(8.0)


def test_two_sample_student_and_welch():
    x = col([1, 2, 3, 4, 5, 2, 4, 6, 8, 10, 12])
    groups = np.r_[np.zeros(5, int), np.ones(6, int)]
    student = compute(x, test="two-sample", groups=groups)
    welch = compute(x, test="two-sample", groups=groups, equal_var=False)
    # scipy.stats.ttest_ind(equal_var=True/False)
    assert student.stat[0] == pytest.approx(-2.2156468, rel=1e-7)
    assert student.p[0] == pytest.approx(0.05394592, rel=1e-6)
    assert float(student.df) == 9
    assert welch.stat[0] == pytest.approx(-2.3763541, rel=1e-7)
    assert welch.df[0] == pytest.approx(6.9722557, rel=1e-7)
    assert welch.p[0] == pytest.approx(0.04928434, rel=1e-6)
    assert welch.df.shape == (1,)


@pytest.mark.parametrize("equal_var", [True, False])
@pytest.mark.parametrize("tail", ["two-sided", "less"])
def test_two_sample_many_points_equals_scipy(rng, equal_var, tail):
    x = rng.standard_normal((23, 40)) * np.r_[np.ones(10), 2 * np.ones(13)][:, None]
    groups = np.r_[np.zeros(10, int), np.ones(13, int)]
    rng.shuffle(groups)
    res = compute(x, test="two-sample", groups=groups, equal_var=equal_var, tail=tail)
    ref = sps.ttest_ind(x[groups == 0], x[groups == 1], equal_var=equal_var, alternative=tail)  # scipy.stats.ttest_ind
    np.testing.assert_allclose(res.stat, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(res.p, ref.pvalue, rtol=1e-10)


def test_hedges_g_equals_statsmodels(rng):
    x = rng.standard_normal((21, 5)) + np.r_[np.ones(9), np.zeros(12)][:, None]
    groups = np.r_[np.zeros(9, int), np.ones(12, int)]
    res = compute(x, test="two-sample", groups=groups)
    from statsmodels.stats.meta_analysis import effectsize_smd

    a, b = x[:9], x[9:]
    # statsmodels.stats.meta_analysis.effectsize_smd: Hedges' g with 1 - 3 / (4 N - 9)
    g, _ = effectsize_smd(a.mean(0), a.std(0, ddof=1), 9, b.mean(0), b.std(0, ddof=1), 12)
    np.testing.assert_allclose(res.effect_size, g, rtol=1e-12)
    np.testing.assert_allclose(res.effect, a.mean(0) - b.mean(0), rtol=1e-12)


# --- Yuen's trimmed t -----------------------------------------------------------


def test_yuen_two_sample_scipy_example():
    a = [56, 128.6, 12, 123.8, 64.34, 78, 763.3]
    b = [1.1, 2.9, 4.2]
    x = col(a + b)
    groups = np.r_[np.zeros(7, int), np.ones(3, int)]
    pooled = compute(x, test="two-sample", groups=groups, statistic="yuen")
    # scipy.stats.ttest_ind(a, b, trim=.2) (its docstring example): t 3.4463884028, p 0.0136933873, df 6
    assert pooled.stat[0] == pytest.approx(3.4463884028, rel=1e-9)
    assert pooled.p[0] == pytest.approx(0.0136933873, rel=1e-8)
    assert float(pooled.df) == 6
    welch = compute(x, test="two-sample", groups=groups, statistic="yuen", equal_var=False)
    # Yuen (1974) proper = ttest_ind(..., trim=.2, equal_var=False)
    assert welch.stat[0] == pytest.approx(4.5915987, rel=1e-7)
    assert welch.df[0] == pytest.approx(4.0178493, rel=1e-7)
    assert welch.p[0] == pytest.approx(0.0099890925, rel=1e-7)


def test_yuen_two_sample_with_outliers():
    a = [1, 2, 3, 4, 5, 6, 7, 8, 9, 30]
    b = [-3, 0, 1, 1.5, 2, 2.5, 3, 4, 5, -20]
    x, groups = col(a + b), np.r_[np.zeros(10, int), np.ones(10, int)]
    welch = compute(x, test="two-sample", groups=groups, statistic="yuen", equal_var=False)
    pooled = compute(x, test="two-sample", groups=groups, statistic="yuen")
    # scipy.stats.ttest_ind(a, b, trim=0.2, equal_var=False) and its pooled variant
    assert welch.stat[0] == pytest.approx(2.7712855, rel=1e-7)
    assert welch.df[0] == pytest.approx(8.1221342, rel=1e-7)
    assert welch.p[0] == pytest.approx(0.0238994, rel=1e-5)
    assert pooled.stat[0] == pytest.approx(2.7712855, rel=1e-7)
    assert pooled.p[0] == pytest.approx(0.0197437, rel=1e-5)
    # trimmed-mean difference equals scipy.stats.trim_mean
    assert welch.effect[0] == pytest.approx(sps.trim_mean(a, 0.2) - sps.trim_mean(b, 0.2), rel=1e-12)


@pytest.mark.parametrize("equal_var", [True, False])
def test_yuen_two_sample_many_points_equals_scipy(rng, equal_var):
    x = rng.standard_t(3, size=(27, 30))
    groups = np.r_[np.zeros(12, int), np.ones(15, int)]
    res = compute(x, test="two-sample", groups=groups, statistic="yuen", equal_var=equal_var, tail="greater")
    # scipy.stats.ttest_ind(..., trim=0.2)
    ref = sps.ttest_ind(x[:12], x[12:], trim=0.2, equal_var=equal_var, alternative="greater")
    np.testing.assert_allclose(res.stat, ref.statistic, rtol=1e-11)
    np.testing.assert_allclose(res.p, ref.pvalue, rtol=1e-9)
    # scipy.stats.trim_mean
    np.testing.assert_allclose(
        res.effect, sps.trim_mean(x[:12], 0.2, axis=0) - sps.trim_mean(x[12:], 0.2, axis=0), rtol=1e-12
    )


def test_yuen_one_sample_textbook_formula():
    x = np.array([-1.2, 0.3, 0.5, 0.8, 1.1, 1.4, 1.9, 2.2, 2.6, 9.0])
    res = compute(col(x), test="one-sample", statistic="yuen")
    # Textbook formula (Tukey & McLaughlin 1963; Yuen 1974 Winsorized variance; the
    # standard error form of Wilcox's textbook, from memory), computed here:
    n, g = 10, 2
    s = np.sort(x)
    w = np.r_[[s[g]] * g, s[g : n - g], [s[n - g - 1]] * g]
    se = w.std(ddof=1) / ((1 - 2 * 0.2) * np.sqrt(n))
    assert res.stat[0] == pytest.approx(s[g : n - g].mean() / se, rel=1e-12)
    # the same formula evaluated by hand (scipy.stats.mstats.trimmed_stde): T 3.3513510, df 5, p 0.0202988, trimmed mean 1.3166667
    assert res.stat[0] == pytest.approx(3.3513510, rel=1e-7)
    assert float(res.df) == 5
    assert res.p[0] == pytest.approx(0.0202988, rel=1e-5)
    assert res.effect[0] == pytest.approx(1.3166667, rel=1e-7)
    # scipy.stats.mstats.trimmed_stde gives the same standard error
    assert res.effect[0] / res.stat[0] == pytest.approx(mstats.trimmed_stde(x, limits=(0.2, 0.2)), rel=1e-10)
    # scipy.stats.trim_mean
    assert res.effect[0] == pytest.approx(sps.trim_mean(x, 0.2), rel=1e-12)


def test_yuen_paired_is_one_sample_on_differences():
    a = np.array([10.1, 9.8, 12.0, 11.5, 10.9, 13.2, 9.5, 11.1, 10.4, 25.0])
    b = np.array([9.0, 9.9, 10.1, 10.0, 9.2, 11.0, 9.6, 9.8, 9.7, 8.0])
    res = compute(col(a - b), test="paired", statistic="yuen")
    # one-sample trimmed t on the differences (Tukey & McLaughlin 1963), computed by hand
    assert res.stat[0] == pytest.approx(5.0382763, rel=1e-7)
    assert res.effect[0] == pytest.approx(1.3666667, rel=1e-7)
    assert res.p[0] == pytest.approx(0.0039727, rel=1e-4)


# --- repeated measures F and correlation -----------------------------------------


def test_repeated_measures_f_by_hand_and_statsmodels(rng):
    n, k, points = 9, 4, 6
    x = rng.standard_normal((n, k, points)) + np.linspace(0, 1, k)[None, :, None]
    res = compute(x, test="repeated-measures", tail="less")
    # by hand: F = (SS_conditions / (k-1)) / (SS_error / ((n-1)(k-1))), common practice, no source
    grand = x.mean(axis=(0, 1))
    ss_c = n * ((x.mean(0) - grand) ** 2).sum(0)
    ss_s = k * ((x.mean(1) - grand) ** 2).sum(0)
    ss_e = ((x - grand) ** 2).sum((0, 1)) - ss_c - ss_s
    f = (ss_c / (k - 1)) / (ss_e / ((n - 1) * (k - 1)))
    np.testing.assert_allclose(res.stat, f, rtol=1e-10)
    np.testing.assert_allclose(res.p, sps.f.sf(f, k - 1, (n - 1) * (k - 1)), rtol=1e-10)
    np.testing.assert_allclose(res.effect_size, ss_c / (ss_c + ss_e), rtol=1e-10)
    np.testing.assert_array_equal(res.df, [3, 24])
    assert res.effective_tail == "greater"
    # statsmodels.stats.anova.AnovaRM on point 0
    import pandas as pd
    from statsmodels.stats.anova import AnovaRM

    frame = pd.DataFrame({"s": np.repeat(np.arange(n), k), "c": np.tile(np.arange(k), n), "y": x[:, :, 0].ravel()})
    table = AnovaRM(frame, "y", "s", within=["c"]).fit().anova_table
    assert res.stat[0] == pytest.approx(table["F Value"].iloc[0], rel=1e-10)
    assert res.p[0] == pytest.approx(table["Pr > F"].iloc[0], rel=1e-8)


@pytest.mark.parametrize("tail", ["two-sided", "greater", "less"])
def test_correlation_equals_pearsonr(rng, tail):
    covariate = rng.standard_normal(14)
    x = rng.standard_normal((14, 25)) + 0.6 * covariate[:, None] * rng.standard_normal(25)
    res = compute(x, test="correlation", covariate=covariate, tail=tail)
    for p in range(0, 25, 6):
        ref = sps.pearsonr(covariate, x[:, p], alternative=tail)  # scipy.stats.pearsonr
        assert res.effect[p] == pytest.approx(ref.statistic, rel=1e-12)
        assert res.p[p] == pytest.approx(ref.pvalue, rel=1e-9)
    r = res.effect
    np.testing.assert_allclose(res.stat, r * np.sqrt(12 / (1 - r**2)), rtol=1e-12)
    assert float(res.df) == 12


@pytest.mark.filterwarnings("ignore:Precision loss:RuntimeWarning")
def test_constant_points_follow_scipy():
    x = np.zeros((6, 3))
    x[:, 1] = 1.0
    x[:, 2] = [1, 2, 3, 4, 5, 7]
    res = compute(x, test="one-sample")
    ref = sps.ttest_1samp(x, 0.0, axis=0)  # scipy.stats.ttest_1samp: nan for 0/0, inf for c/0
    np.testing.assert_array_equal(res.stat, ref.statistic)
    assert np.isnan(res.stat[0]) and np.isinf(res.stat[1])


# --- cluster-forming threshold ------------------------------------------------------


@pytest.mark.parametrize(
    "df, two_sided, one_sided", [(5, 2.5705818, 2.0150484), (9, 2.2621572, 1.8331129), (19, 2.0930241, 1.7291328)]
)
def test_forming_threshold(df, two_sided, one_sided):
    # scipy.stats.t.isf
    assert forming_threshold(0.05, test="one-sample", df=np.asarray(df), tail="two-sided") == pytest.approx(
        two_sided, rel=1e-7
    )
    assert forming_threshold(0.05, test="paired", df=df, tail="greater") == pytest.approx(one_sided, rel=1e-7)
    assert forming_threshold(0.05, test="paired", df=df, tail="less") == pytest.approx(one_sided, rel=1e-7)


def test_forming_threshold_f_and_welch():
    # scipy.stats.f.isf: F upper tail whatever the tail
    assert forming_threshold(0.01, test="repeated-measures", df=[2, 30], tail="two-sided") == pytest.approx(
        sps.f.isf(0.01, 2, 30), rel=1e-12
    )
    # Welch: the median per-point df
    assert forming_threshold(0.05, test="two-sample", df=np.array([7.0, 9.0, 30.0]), tail="two-sided") == (
        pytest.approx(sps.t.isf(0.025, 9.0), rel=1e-12)
    )


# --- bad input ---------------------------------------------------------------------


def test_bad_inputs():
    x = np.zeros((6, 4))
    x[:, 0] = np.arange(6)
    g = np.r_[np.zeros(3, int), np.ones(3, int)]
    with pytest.raises(UserError, match=r"`test` must be one of .*got 'anova'"):
        compute(x, test="anova")
    with pytest.raises(UserError, match=r"`tail` must be one of .*got 'both'"):
        compute(x, test="one-sample", tail="both")
    with pytest.raises(UserError, match=r"the one-sample test needs at least 3 subjects, got 2"):
        compute(x[:2], test="one-sample")
    with pytest.raises(UserError, match=r"one-sample data must be a 2-D array \(subjects, points\), got shape \(6,\)"):
        compute(x[:, 0], test="one-sample")
    bad = x.copy()
    bad[4, 2] = np.nan
    with pytest.raises(UserError, match=r"1 non-finite values .* subject index 4, position \(2,\)"):
        compute(bad, test="one-sample")
    with pytest.raises(UserError, match=r"the two-sample test needs `groups`"):
        compute(x, test="two-sample")
    with pytest.raises(UserError, match=r"group 1 has none"):
        compute(x, test="two-sample", groups=np.zeros(6, int))
    with pytest.raises(UserError, match=r"group 0 has 2 subjects; the two-sample test needs at least 3 per group"):
        compute(x, test="two-sample", groups=np.r_[0, 0, 1, 1, 1, 1])
    with pytest.raises(UserError, match=r"group 0 has 1 subject; the two-sample"):
        compute(x, test="two-sample", groups=np.r_[0, 1, 1, 1, 1, 1])
    with pytest.raises(UserError, match=r"`groups` must hold labels 0 and 1, found \[0, 2\]"):
        compute(x, test="two-sample", groups=g * 2)
    with pytest.raises(UserError, match=r"`groups` must hold one label per subject \(6\), got shape \(5,\)"):
        compute(x, test="two-sample", groups=g[:5])
    with pytest.raises(UserError, match=r"`groups` is only used by the two-sample test"):
        compute(x, test="one-sample", groups=g)
    with pytest.raises(UserError, match=r"`covariate` is the same for every subject \(2.0\)"):
        compute(x, test="correlation", covariate=np.full(6, 2.0))
    with pytest.raises(UserError, match=r"the correlation test needs `covariate`"):
        compute(x, test="correlation")
    with pytest.raises(UserError, match=r"statistic 'yuen' is available for .* not 'correlation'"):
        compute(x, test="correlation", covariate=np.arange(6.0), statistic="yuen")
    with pytest.raises(UserError, match=r"`trim` must be at least 0 and below 0.5, got 0.5"):
        compute(x, test="one-sample", statistic="yuen", trim=0.5)
    with pytest.raises(UserError, match=r"trim 0.4 leaves fewer than 2 of the 3 subjects of group 0"):
        compute(x, test="two-sample", groups=g, statistic="yuen", trim=0.4)
    with pytest.raises(UserError, match=r"needs at least 3 conditions, got 2 \(use the paired test for two\)"):
        compute(np.zeros((6, 2, 3)), test="repeated-measures")
    with pytest.raises(UserError, match=r"the cluster-forming p must be between 0 and 1, got 1.5"):
        forming_threshold(1.5, test="one-sample", df=5, tail="two-sided")
