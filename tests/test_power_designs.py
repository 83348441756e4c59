"""Power simulation of the designs beyond one- and two-sample: weighted, between-groups, regression, voltage maps."""

import textwrap

import numpy as np
import pytest
import scipy.stats
from scipy.ndimage import gaussian_filter

from famwise.calibrate.table import fwer_interval
from famwise.design import ContrastData
from famwise.errors import UserError
from famwise.plan import Plan
from famwise.power.settings import power_shard_settings, power_spec
from famwise.power.shard import power_shard
from famwise.power.simulate import effect_map, group_sizes, pilot_from, region_mask, simulate_study
from famwise.power.text import methods_sentences
from famwise.preflight import Where
from famwise.preflight.power_check import check_power_sizes
from famwise.spec import load_study

SPEC = """\
version: 1
name: power designs test
seed: 9
subjects: {{source: epochs, path: "data/sub-{{subject}}.npz"}}
conditions: {{a: [a]}}
contrasts:
  - {{name: c1, test: one-sample, conditions: [a]}}
inference:
  alpha: 0.05
  permutations: 99
  corrections:
{corrections}
power:
{power}
"""


def _plan(folder, *, corrections, power):
    """A plan for the shard settings only (the pilot's test comes from its subjects file)."""
    spec = folder / "study.yaml"
    spec.write_text(SPEC.format(corrections=textwrap.indent(corrections, "    "), power=textwrap.indent(power, "  ")))
    return Plan(load_study(spec))


def _data(x, shape, test, *, freqs=None, **design):
    return ContrastData(
        x=np.asarray(x, dtype=np.float32),
        test=test,
        subjects=tuple(f"s{i}" for i in range(x.shape[0])),
        channels=tuple(f"ch{i}" for i in range(shape[0])),
        freqs=np.linspace(4, 12, shape[1]) if freqs is None else freqs,
        times=np.arange(shape[2]) / 50,
        **design,
    )


def _detected(plan, data, path, effect, n, correction):
    data.save(path)
    merged = power_shard(path, None, shard=0, settings=power_shard_settings(plan, power_spec(plan), "c1", effect, n))
    labels = [str(x) for x in merged["labels"]]
    column = labels.index(correction)
    return merged["detected"][:, column], merged["outside"][:, column]


def _smooth(rng, n, shape):
    return gaussian_filter(rng.normal(size=(n, *shape)), sigma=(0, 0, 0.8, 1.2)).reshape(n, -1)


def _regression_pilot(rng, n, shape):
    """Maps with a nuisance effect (age) and none of the tested covariate; a 3-level site coded as 2 indicators."""
    covariate = rng.normal(size=n)
    age = rng.uniform(20, 40, n)
    site = np.eye(3)[rng.integers(0, 3, n)][:, 1:]
    x = _smooth(rng, n, shape) + 0.05 * np.outer(age - 30, np.ones(int(np.prod(shape))))
    return _data(x, shape, "regression", covariate=covariate, nuisance=np.column_stack([age, site]))


def test_between_groups_single_point_power_equals_noncentral_f(tmp_path):
    """One point, Bonferroni over m = 1, three equal groups: the simulated power of the one-way F equals the analytic
    power P(F > F_crit), F ~ noncentral F(2, N - 3, f^2 N) (Cohen 1988, section 8.2; `scipy.stats.ncf`), within
    3 Monte Carlo SEs."""
    rng = np.random.default_rng(0)
    x = rng.normal(size=(3000, 1))  # a pilot this large resamples like the normal distribution
    data = _data(x, (1, 1, 1), "between-groups", groups=np.repeat([0, 1, 2], 1000))
    plan = _plan(
        tmp_path,
        corrections="- method: bonferroni\n",
        power="studies: 300\nshards: 1\nsample_sizes: [15, 30]\neffect: {source: specified, d: [0.35, 0.6]}\n",
    )
    for f, tag in ((0.35, "d-0.35"), (0.6, "d-0.6")):
        for n in (15, 30):
            detected, _ = _detected(plan, data, tmp_path / "subjects.npz", tag, n, "bonferroni")
            critical = scipy.stats.f.ppf(0.95, 2, n - 3)
            analytic = scipy.stats.ncf(2, n - 3, f**2 * n).sf(critical)
            error = np.sqrt(analytic * (1 - analytic) / detected.size)
            assert abs(detected.mean() - analytic) <= 3 * error, (f, n, detected.mean(), analytic)


@pytest.mark.parametrize("test", ["between-groups", "regression"])
def test_zero_effect_max_stat_detects_at_most_alpha(tmp_path, test):
    """With zero effect, the max-statistic detection rate is at most alpha: the exact binomial (Clopper & Pearson
    1934) 95% interval of the rate reaches down to 0.05 or below (common practice, no source).

    Without the random sign on resampled residuals (`famwise.power.simulate`) this failed: 0.09-0.20 in 400 studies.
    """
    rng = np.random.default_rng(1)
    shape = (2, 3, 6)
    effect = "{source: specified, d: [0.0], channels: [ch0]}"
    if test == "regression":  # three nuisance columns: n = 30 (Freedman-Lane is approximate with few df)
        data, n = _regression_pilot(rng, 40, shape), 30
    else:
        data, n = _data(_smooth(rng, 45, shape), shape, test, groups=np.repeat([0, 1, 2], [10, 15, 20])), 16
    plan = _plan(
        tmp_path,
        corrections="- method: max-stat\n",
        power=f"studies: 100\nshards: 1\nsample_sizes: [{n}]\neffect: {effect}\n",
    )
    detected, outside = _detected(plan, data, tmp_path / "subjects.npz", "d-0", n, "max-stat")
    hits = int(np.count_nonzero(detected | (outside > 0)))
    assert fwer_interval(hits, detected.size)[0] <= 0.05, (test, hits)


@pytest.mark.slow
@pytest.mark.parametrize("test", ["between-groups", "regression"])
def test_power_grows_with_n(tmp_path, test):
    """Power increases with the sample size (common practice, no source)."""
    rng = np.random.default_rng(2)
    shape = (2, 3, 6)
    if test == "regression":
        data, size = _regression_pilot(rng, 40, shape), 0.5
    else:
        data, size = _data(_smooth(rng, 45, shape), shape, test, groups=np.repeat([0, 1, 2], 15)), 0.5
    plan = _plan(
        tmp_path,
        corrections="- method: max-stat\n",
        power=f"studies: 60\nshards: 1\nsample_sizes: [9, 18, 36]\n"
        f"effect: {{source: specified, d: [{size}], channels: [ch1], time_ms: [20, 80]}}\n",
    )
    power = [
        _detected(plan, data, tmp_path / "subjects.npz", f"d-{size}", n, "max-stat")[0].mean() for n in (9, 18, 36)
    ]
    assert power[0] < power[1] < power[2] or power[2] == 1.0, power
    assert power[2] - power[0] > 0.3, power


def test_regression_specified_size_is_the_partial_correlation():
    """The specified size of a regression is the partial correlation of maps and tested covariate given the
    nuisance covariates: the correlation of both after regressing out [1, nuisance] (Frisch & Waugh 1933;
    `scipy.stats.pearsonr`)."""
    rng = np.random.default_rng(3)
    data = _regression_pilot(rng, 60, (1, 1, 3))
    pilot = pilot_from(data)
    slope = effect_map(pilot, source="specified", size=0.4, region=np.array([True, True, False]))
    big = simulate_study(pilot, slope, 40000, np.random.default_rng(4))
    reduced = np.column_stack([np.ones(big.x.shape[0]), big.nuisance])

    def partialled(values):
        return values - reduced @ np.linalg.lstsq(reduced, values, rcond=None)[0]

    c = partialled(big.covariate)
    r = [scipy.stats.pearsonr(c, partialled(big.x[:, p].astype(np.float64))).statistic for p in range(3)]
    np.testing.assert_allclose(r, [0.4, 0.4, 0.0], atol=0.02)
    with pytest.raises(UserError, match="power.effect.d: for a regression contrast the size is the partial"):
        effect_map(pilot, source="specified", size=1.0, region=np.ones(3, bool))


def test_regression_pilot_effect_is_the_ols_coefficient():
    """Source 'pilot' adds back the tested coefficient of the pilot's OLS fit (`numpy.linalg.lstsq`), times the factor:
    a very large simulated study recovers 0.5 of it."""
    rng = np.random.default_rng(5)
    data = _regression_pilot(rng, 50, (1, 1, 2))
    x = np.asarray(data.x, dtype=np.float64) + np.outer(data.covariate, [0.8, -0.3])
    data = _data(x, (1, 1, 2), "regression", covariate=data.covariate, nuisance=data.nuisance)
    design = np.column_stack([np.ones(50), data.covariate, data.nuisance])
    b1 = np.linalg.lstsq(design, x, rcond=None)[0][1]
    pilot = pilot_from(data)
    np.testing.assert_allclose(pilot.effect, b1, rtol=1e-6)
    big = simulate_study(pilot, effect_map(pilot, source="pilot", size=0.5, region=np.ones(2, bool)), 30000, rng)
    design = np.column_stack([np.ones(30000), big.covariate, big.nuisance])
    refit = np.linalg.lstsq(design, big.x.astype(np.float64), rcond=None)[0][1]
    np.testing.assert_allclose(refit, 0.5 * b1, atol=0.03)


def test_rank_deficient_regression_resamples_are_drawn_again():
    """A site with one pilot subject is often missing from a small resample (an all-zero indicator column): such draws
    are drawn again, so every simulated design has full rank; too few subjects for the parameters is an error."""
    rng = np.random.default_rng(6)
    n = 12
    site = np.zeros((n, 1))
    site[0] = 1.0
    data = _data(rng.normal(size=(n, 2)), (1, 1, 2), "regression", covariate=rng.normal(size=n), nuisance=site)
    pilot = pilot_from(data)
    for seed in range(30):
        study = simulate_study(pilot, np.zeros(2), 6, np.random.default_rng(seed))
        design = np.column_stack([np.ones(6), study.covariate, study.nuisance])
        assert np.linalg.matrix_rank(design) == 3
    with pytest.raises(UserError, match="power.sample_sizes: N = 3 leaves no degrees of freedom"):
        simulate_study(pilot, np.zeros(2), 3, rng)


def test_between_groups_sizes_and_effects():
    groups = np.repeat([0, 1, 2], [3, 5, 12])
    assert group_sizes(groups, 33) == [5, 8, 20]  # 4.95, 8.25, 19.8 by largest remainders
    assert group_sizes(groups, 7) == [2, 2, 3]  # at least 2 per group
    with pytest.raises(UserError, match="power.sample_sizes: N = 5 is too small for 3 groups"):
        group_sizes(groups, 5)
    rng = np.random.default_rng(7)
    x = rng.normal(size=(20, 2)) + np.where(groups == 2, 1.0, 0.0)[:, None]
    pilot = pilot_from(_data(x, (1, 1, 2), "between-groups", groups=groups))
    means = np.stack([x[groups == g].mean(axis=0) for g in range(3)])
    share = np.array([3, 5, 12]) / 20
    np.testing.assert_allclose(pilot.effect, means - share @ means, rtol=1e-5)
    effect = effect_map(pilot, source="specified", size=0.25, region=np.array([True, False]))
    spread = np.sqrt(share @ effect[:, 0] ** 2 - (share @ effect[:, 0]) ** 2)
    np.testing.assert_allclose(spread, 0.25 * pilot.spread[0])  # Cohen's f: SD of the means over the pooled SD
    assert np.all(np.diff(effect[:, 0]) > 0) and np.all(effect[:, 1] == 0)
    study = simulate_study(pilot, effect, 40, rng)
    assert np.bincount(study.groups).tolist() == [6, 10, 24]


def test_weighted_contrast_is_resampled_as_one_map_per_subject():
    rng = np.random.default_rng(8)
    x = rng.normal(0.5, 2.0, size=(25, 3))
    pilot = pilot_from(_data(x, (1, 1, 3), "weighted"))
    np.testing.assert_allclose(pilot.effect, x.mean(axis=0), rtol=1e-5)
    effect = effect_map(pilot, source="specified", size=0.5, region=np.ones(3, bool))
    np.testing.assert_allclose(effect, 0.5 * x.std(axis=0, ddof=1), rtol=1e-5)  # d_z of the weighted sum
    big = simulate_study(pilot, effect, 50000, rng).x
    np.testing.assert_allclose(big.mean(axis=0) / big.std(axis=0, ddof=1), 0.5, atol=0.02)


def test_voltage_pilot_effect_region_has_channels_and_time_but_no_band(tmp_path):
    voltage = np.array([0.0])  # a voltage map's single frequency entry
    rng = np.random.default_rng(9)
    shape = (3, 1, 10)
    data = _data(_smooth(rng, 30, shape), shape, "paired", freqs=voltage)
    region = region_mask(data, channels=["ch2"], time_ms=[40, 100])
    assert np.flatnonzero(region).tolist() == [22, 23, 24, 25]  # ch2, 40-100 ms at 50 Hz
    with pytest.raises(UserError, match="power.effect.freq_hz: voltage maps have no frequency axis"):
        region_mask(data, freq_hz=[4, 8])
    plan = _plan(
        tmp_path,
        corrections="- method: max-stat\n",
        power="studies: 20\nshards: 1\nsample_sizes: [20]\n"
        "effect: {source: specified, d: [1.5], channels: [ch2], time_ms: [40, 100]}\n",
    )
    detected, _ = _detected(plan, data, tmp_path / "subjects.npz", "d-1.5", 20, "max-stat")
    assert detected.mean() >= 0.8  # d_z = 1.5 with 20 subjects over 30 points: nearly always found


def test_methods_sentence_names_the_maps_the_resampling_and_the_size():
    rows = [
        dict(effect="d-0.3", correction="max-stat", n=20, power=0.85, power_ci_low=0.8, power_ci_high=0.9, studies=200)
    ]
    info = dict(
        contrast="age",
        effect=dict(source="specified", channels=["Pz"], time_ms=[300, 600]),
        alpha=0.05,
        target=0.8,
        test="regression",
        maps="voltage",
    )
    text = methods_sentences(rows, info, pilot_n=30)
    assert "resampled the residual voltage maps of the 30 pilot participants with replacement, together with" in text
    assert "(channel Pz; 300-600 ms)" in text and "a standardised effect of partial r = 0.3:" in text
    info.update(test="between-groups", maps="time-frequency")
    assert "within each group" in methods_sentences(rows, info) and "Cohen's f = 0.3" in methods_sentences(rows, info)


def test_sample_sizes_too_small_for_the_groups_stop_before_any_job(tmp_path):
    spec = tmp_path / "study.yaml"
    spec.write_text(
        "version: 1\nname: groups\nsubjects:\n  source: epochs\n  path: data/sub-{subject}.npz\n"
        "  groups: {'01': young, '02': middle, '03': old}\nconditions: {a: [a]}\ncontrasts:\n"
        "  - {name: c, test: between-groups, conditions: [a], groups: [young, middle, old]}\n"
        "inference:\n  corrections:\n    - method: holm\npower:\n  sample_sizes: [12, 5]\n"
    )
    plan = Plan(load_study(spec))
    with pytest.raises(UserError, match=r"study.yaml:\d+ power.sample_sizes\[0\]: N = 5 is too small for contrast c: "):
        check_power_sizes(plan, power_spec(plan), ["c"], Where(plan.loaded))
