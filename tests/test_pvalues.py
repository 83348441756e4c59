"""p-value procedures: Bonferroni, Sidak, Holm, Hochberg, Benjamini-Hochberg, Benjamini-Yekutieli."""

import numpy as np
import pytest
import scipy.stats
from statsmodels.stats.multitest import multipletests

from famwise.correct.pvalues import METHODS, adjust, adjust_family
from famwise.errors import UserError

STATSMODELS_NAMES = {
    "bonferroni": "bonferroni",
    "sidak": "sidak",
    "holm": "holm",
    "hochberg": "simes-hochberg",
    "fdr-bh": "fdr_bh",
    "fdr-by": "fdr_by",
}

# The p-values of the Benjamini & Hochberg (1995) example (Neuhaus et al. 1992 trial data), confirmed
# second-hand via the scipy.stats.false_discovery_control docstring, not from the paper itself.
BH_1995 = np.array(
    [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459, 0.3240, 0.4262, 0.5719, 0.6528,
     0.7590, 1.000]
)  # fmt: skip


def _random_p(seed, size, ties):
    rng = np.random.default_rng(seed)
    p = rng.uniform(size=size) ** 3  # skewed towards 0 so that every method rejects some
    if ties:
        p = np.round(p, 2)  # many exact ties, some at 0 and at 1
    return p


@pytest.mark.filterwarnings("ignore:divide by zero encountered in log1p:RuntimeWarning")  # statsmodels' Sidak at p = 1
@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("ties", [False, True])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_adjust_matches_statsmodels(method, ties, seed):
    # Source: statsmodels.stats.multitest.multipletests (general-purpose library).
    p = _random_p(seed, 500, ties)
    result = adjust(p, method=method, alpha=0.05)
    reject, expected, _, _ = multipletests(p, alpha=0.05, method=STATSMODELS_NAMES[method])
    np.testing.assert_allclose(result.p_corrected, expected, rtol=1e-12, atol=1e-15)
    np.testing.assert_array_equal(result.mask, reject)
    assert 0 < result.n_significant < p.size


@pytest.mark.parametrize(("method", "scipy_method"), [("fdr-bh", "bh"), ("fdr-by", "by")])
@pytest.mark.parametrize("ties", [False, True])
def test_fdr_matches_scipy(method, scipy_method, ties):
    # Source: scipy.stats.false_discovery_control (general-purpose library).
    p = _random_p(7, 1000, ties)
    expected = scipy.stats.false_discovery_control(p, method=scipy_method)
    np.testing.assert_allclose(adjust(p, method=method).p_corrected, expected, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("method", METHODS)
def test_shape_kept_and_result_fields(method):
    p = _random_p(3, (4, 5, 6), ties=False)
    result = adjust(p, method=method, alpha=0.1)
    flat = adjust(p.ravel(), method=method, alpha=0.1)
    assert result.p_corrected.shape == p.shape and result.mask.shape == p.shape
    np.testing.assert_array_equal(result.p_corrected.ravel(), flat.p_corrected)
    assert result.settings == {"alpha": 0.1, "m": 120}
    assert result.method == method and result.threshold_kind == "p" and result.null is None
    np.testing.assert_array_equal(result.mask, result.p_corrected <= 0.1)
    assert result.p_corrected.max() <= 1.0
    assert np.all(result.p_corrected >= p)


@pytest.mark.parametrize("method", ["holm", "hochberg", "fdr-bh", "fdr-by"])
def test_stepwise_monotone_and_threshold_is_largest_significant_p(method):
    p = _random_p(4, 2000, ties=True)
    result = adjust(p, method=method)
    order = np.argsort(p, kind="stable")
    assert np.all(np.diff(result.p_corrected[order]) >= 0)
    assert result.threshold == p[result.mask].max()
    assert np.all(result.mask == (p <= result.threshold))


def test_threshold_none_when_nothing_significant():
    assert adjust([0.5, 0.9, 0.2], method="holm").threshold is None
    assert adjust([0.5, 0.9, 0.2], method="fdr-bh").n_significant == 0


def test_bonferroni_threshold_for_100_tests():
    # Common practice, no source: 100 tests at 0.05 give a Bonferroni per-test threshold of 0.0005.
    result = adjust(np.full(100, 0.3), method="bonferroni", alpha=0.05)
    assert result.threshold == pytest.approx(0.0005, rel=1e-12)


def test_holm_second_threshold_with_10_tests():
    # Common practice, no source: with 10 p-values Holm compares the second smallest with 0.05 / 9.
    second = 0.05 / 9
    below = adjust([0.001, second * 0.999] + [0.5] * 8, method="holm")
    above = adjust([0.001, second * 1.001] + [0.5] * 8, method="holm")
    assert below.n_significant == 2 and below.threshold == pytest.approx(second * 0.999)
    assert above.n_significant == 1 and above.threshold == 0.001


def test_bonferroni_on_bh_example():
    # Bonferroni inequality (common practice; statsmodels.stats.multitest.multipletests); 15 p capped at 1, 3 rejections.
    result = adjust(BH_1995, method="bonferroni")
    expected = [0.0015, 0.006, 0.0285, 0.1425, 0.3015, 0.417, 0.447, 0.516, 0.6885, 1, 1, 1, 1, 1, 1]
    np.testing.assert_allclose(result.p_corrected, expected, rtol=1e-12)
    assert result.n_significant == 3


@pytest.mark.parametrize(
    ("m", "expected"), [(10, 5.116197e-3), (20, 2.561379e-3), (100, 5.128014e-4), (1000, 5.129198e-5)]
)
def test_sidak_threshold(m, expected):
    # Sidak (1967) per-test level 1 - (1 - alpha)^(1/m).
    assert adjust(np.full(m, 0.5), method="sidak").threshold == pytest.approx(expected, rel=1e-6)


def test_sidak_adjusted_p():
    # Sidak (1967), adjusted p for p = 0.01, m = 4.
    assert adjust([0.01, 0.5, 0.6, 0.7], method="sidak").p_corrected[0] == pytest.approx(0.03940399, rel=1e-7)


DISCRIMINATING = {  # method: (mask, adjusted p), input order kept
    "bonferroni": ([1, 0, 0, 1], [0.04, 0.16, 0.12, 0.02]),
    "holm": ([1, 0, 0, 1], [0.03, 0.06, 0.06, 0.02]),
    "hochberg": ([1, 1, 1, 1], [0.03, 0.04, 0.04, 0.02]),
    "fdr-bh": ([1, 1, 1, 1], [0.02, 0.04, 0.04, 0.02]),
    "fdr-by": ([1, 0, 0, 1], [0.0416667, 0.0833333, 0.0833333, 0.0416667]),
    "sidak": ([1, 0, 0, 1], [0.03940399, 0.15065344, 0.11470719, 0.01985050]),
}


@pytest.mark.parametrize("method", METHODS)
def test_discriminating_example(method):
    # definitions in Holm (1979), Hochberg (1988), Benjamini & Hochberg (1995),
    # Benjamini & Yekutieli (2001), Sidak (1967); values of statsmodels.stats.multitest.multipletests.
    # Hochberg rejects 4 where Holm rejects 2.
    mask, adjusted = DISCRIMINATING[method]
    result = adjust([0.01, 0.04, 0.03, 0.005], method=method, alpha=0.05)
    np.testing.assert_array_equal(result.mask, np.array(mask, dtype=bool))
    np.testing.assert_allclose(result.p_corrected, adjusted, atol=1e-7)


def test_benjamini_hochberg_1995_example():
    # Benjamini & Hochberg (1995), JRSS-B 57:289-300, 15 p-values at q = 0.05: BH rejects the
    # four smallest, Bonferroni three. Confirmed second-hand via the scipy.stats.false_discovery_control docstring.
    result = adjust(BH_1995, method="fdr-bh", alpha=0.05)
    np.testing.assert_array_equal(np.flatnonzero(result.mask), [0, 1, 2, 3])
    expected = [0.0015, 0.003, 0.0095, 0.035625, 0.0603, 0.06385714, 0.06385714, 0.0645, 0.0765, 0.486,
                0.58118182, 0.714875, 0.75323077, 0.81321429, 1.0]  # fmt: skip
    np.testing.assert_allclose(result.p_corrected, expected, atol=1e-8)
    assert result.threshold == 0.0095
    assert adjust(BH_1995, method="bonferroni").n_significant == 3


def test_bh_shuffled_input_gives_same_decisions():
    # Benjamini & Hochberg (1995): decisions belong to hypotheses, not to input positions.
    shuffle = np.random.default_rng(5).permutation(BH_1995.size)
    result = adjust(BH_1995[shuffle], method="fdr-bh")
    np.testing.assert_array_equal(result.mask, np.isin(shuffle, [0, 1, 2, 3]))


def test_other_procedures_on_bh_example():
    # counts and adjusted p of statsmodels.stats.multitest.multipletests (not quoted from BH 1995).
    counts = {"bonferroni": 3, "sidak": 3, "holm": 3, "hochberg": 3, "fdr-by": 3, "fdr-bh": 4}
    for method, count in counts.items():
        assert adjust(BH_1995, method=method).n_significant == count, method
    head = {
        "holm": [0.0015, 0.0056, 0.0247, 0.114, 0.2211, 0.278, 0.278, 0.278, 0.3213, 1],
        "hochberg": [0.0015, 0.0056, 0.0247, 0.114, 0.2211, 0.2682, 0.2682, 0.2752, 0.3213, 1],
        "fdr-by": [
            0.00497734,
            0.00995469,
            0.03152318,
            0.11821191,
            0.20008921,
            0.21189262,
            0.21189262,
            0.21402577,
            0.25384452,
            1,
        ],  # fmt: skip
    }
    for method, expected in head.items():
        np.testing.assert_allclose(adjust(BH_1995, method=method).p_corrected[:10], expected, atol=1e-7)


@pytest.mark.parametrize(("m", "harmonic"), [(4, 2.0833333), (15, 3.3182290), (100, 5.1873775)])
def test_by_equals_harmonic_factor_times_bh(m, harmonic):
    # Benjamini & Yekutieli (2001) factor c(m) = sum 1/i; BY-adjusted = min(1, c(m) BH-adjusted).
    p = _random_p(m, m, ties=False)
    by = adjust(p, method="fdr-by").p_corrected
    bh = adjust(p, method="fdr-bh").p_corrected
    np.testing.assert_allclose(by, np.minimum(1.0, harmonic * bh), rtol=1e-7)


def test_by_thresholds_for_15_tests():
    # Benjamini & Yekutieli (2001): BY thresholds i q / (m c(m)) for m = 15, q = 0.05: 0.00100455, 0.00200910, 0.00301366,
    # 0.00401821.
    thresholds = np.array([0.00100455, 0.00200910, 0.00301366, 0.00401821])
    rest = [0.9] * 11
    assert adjust(list(thresholds * 0.9999) + rest, method="fdr-by").n_significant == 4
    assert adjust(list(thresholds[:3] * 0.9999) + [0.00401821 * 1.0001] + rest, method="fdr-by").n_significant == 3


def test_adjust_family_is_one_family():
    p_list = [_random_p(8, (3, 7), ties=False), _random_p(9, 50, ties=False)]
    results = adjust_family(p_list, method="holm", alpha=0.05)
    joint = adjust(np.concatenate([p.ravel() for p in p_list]), method="holm")
    assert [r.p_corrected.shape for r in results] == [(3, 7), (50,)]
    np.testing.assert_array_equal(np.concatenate([r.p_corrected.ravel() for r in results]), joint.p_corrected)
    assert all(r.settings == {"alpha": 0.05, "m": 71, "contrasts": 2} for r in results)
    assert results[0].threshold == results[1].threshold == joint.threshold
    # Fewer significant points than each contrast adjusted alone: m counts both contrasts.
    alone = adjust(p_list[1], method="holm")
    assert results[1].n_significant <= alone.n_significant


@pytest.mark.parametrize(
    ("p", "kwargs", "message"),
    [
        ([0.1, np.nan, 0.2], {"method": "holm"}, r"holm: p-values must not be NaN; found 1 NaN of 3 points"),
        ([0.1, 1.5], {"method": "fdr-bh"}, r"fdr-bh: p-values must lie in \[0, 1\]; found values from 0.1 to 1.5"),
        ([0.1, -0.1], {"method": "sidak"}, r"p-values must lie in \[0, 1\]"),
        ([0.1], {"method": "fdr"}, r"correction method must be one of bonferroni, .*; got 'fdr'"),
        ([0.1], {"method": "holm", "alpha": 0}, r"alpha must be a number strictly between 0 and 1; got 0"),
        ([0.1], {"method": "holm", "alpha": 1.5}, r"alpha must be .*; got 1.5"),
        ([], {"method": "bonferroni"}, r"bonferroni: expected at least one p-value, got an empty family"),
    ],
)
def test_bad_input(p, kwargs, message):
    with pytest.raises(UserError, match=message):
        adjust(p, **kwargs)


def test_adjust_family_needs_a_contrast():
    with pytest.raises(UserError, match="all-contrasts family: expected at least one contrast, got none"):
        adjust_family([], method="holm")
