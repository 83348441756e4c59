"""Regression with nuisance covariates: OLS t against statsmodels, the Freedman-Lane null against the naive refit."""

import numpy as np
import pytest
import statsmodels.api as sm

from famwise.errors import UserError
from famwise.kernels.regression_t import SUBJECTS_PER_PASS, VECTORS_PER_PASS, _freedman_lane_t
from famwise.naive.regression import freedman_lane_null
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import iter_null_blocks, run_shards
from famwise.nulls.shard import make_collectors
from famwise.nulls.tables import make_table, smallest_attainable_p
from famwise.settings import ClusterNullSettings, ExceedanceNullSettings, StepDownNullSettings, TFCENullSettings
from famwise.stats import compute
from famwise.stats.coding import code_design


@pytest.fixture
def study():
    """14 subjects, 40 points: maps with an age effect at the first 10 points and a site effect everywhere."""
    rng = np.random.default_rng(20261202)
    n = 14
    age = rng.uniform(20, 70, n)
    site = (np.arange(n) % 2).astype(float)
    sex = rng.integers(0, 2, n).astype(float)
    x = rng.standard_normal((n, 40)) + 0.8 * site[:, None]
    x[:, :10] += 0.05 * age[:, None]
    return x, age, np.column_stack([site, sex])


def test_t_and_p_match_statsmodels_ols(study):
    # Source: statsmodels.api.OLS (general-purpose library): t and two-sided p of the tested coefficient.
    x, age, nuisance = study
    res = compute(x, test="regression", covariate=age, nuisance=nuisance)
    design = sm.add_constant(np.column_stack([age, nuisance]))
    assert float(res.df) == x.shape[0] - 4
    for point in (0, 3, 9, 17, 39):
        fit = sm.OLS(x[:, point], design).fit()
        assert res.stat[point] == pytest.approx(fit.tvalues[1], rel=1e-10)
        assert res.p[point] == pytest.approx(fit.pvalues[1], rel=1e-8)
        assert res.effect[point] == pytest.approx(fit.params[1], rel=1e-10)
    one_sided = compute(x, test="regression", covariate=age, nuisance=nuisance, tail="greater")
    fit = sm.OLS(x[:, 0], design).fit()
    half = fit.pvalues[1] / 2  # one-sided p from the two-sided one of statsmodels
    assert one_sided.p[0] == pytest.approx(half if fit.tvalues[1] > 0 else 1 - half, rel=1e-8)


def test_without_nuisance_equals_the_correlation_t(study):
    # With no nuisance covariate the OLS slope t equals Pearson's r transformed, r sqrt((n-2)/(1-r^2)) (from memory).
    x, age, _ = study
    reg = compute(x, test="regression", covariate=age, nuisance=np.zeros((x.shape[0], 0)))
    cor = compute(x, test="correlation", covariate=age)
    np.testing.assert_allclose(reg.stat, cor.stat, rtol=1e-10)


def test_engine_matches_the_naive_refit_monte_carlo(study):
    # Freedman & Lane (1983); Winkler et al. (2014): permute reduced-model residuals, add the reduced fit, refit.
    x, age, nuisance = study
    table = make_table("regression", n_subjects=x.shape[0], permutations=30, seed=7)
    fast = np.concatenate(
        list(iter_null_blocks(x, table.rows, test="regression", covariate=age, nuisance=nuisance, block_size=8))
    )
    slow = freedman_lane_null(x, table.rows, covariate=age, nuisance=nuisance)
    np.testing.assert_allclose(fast, slow, rtol=2e-5, atol=2e-5)
    observed = compute(x, test="regression", covariate=age, nuisance=nuisance).stat
    np.testing.assert_allclose(fast[0], observed, rtol=1e-6)  # row 0 is the identity


def test_engine_matches_the_naive_refit_under_exact_enumeration():
    # Every one of the 5! orders is enumerated once, identity first (Freedman & Lane 1983, naive refit).
    rng = np.random.default_rng(3)
    x = rng.standard_normal((5, 12))
    covariate, nuisance = rng.standard_normal(5), rng.standard_normal((5, 1))
    table = make_table("regression", n_subjects=5, permutations=200, seed=1)
    assert table.exact and table.n_rows == 120 and table.scheme == "freedman-lane"
    assert len({tuple(r) for r in table.rows}) == 120 and list(table.rows[0]) == list(range(5))
    assert smallest_attainable_p(table, tail="two-sided") == pytest.approx(1 / 120)
    fast = next(
        iter_null_blocks(x, table.rows, test="regression", covariate=covariate, nuisance=nuisance, block_size=120)
    )
    slow = freedman_lane_null(x, table.rows, covariate=covariate, nuisance=nuisance)
    np.testing.assert_allclose(fast, slow, rtol=2e-5, atol=2e-5)


def test_null_is_bit_identical_across_shards_and_blocks(study):
    x, age, nuisance = study
    table = make_table("regression", n_subjects=x.shape[0], permutations=99, seed=2)
    options = {"test": "regression", "covariate": age, "nuisance": nuisance}
    merged = [
        run_shards(
            x,
            table,
            n_shards=shards,
            make_collectors=lambda: [MaxStatCollector(tail="two-sided", key="m")],
            block_size=block,
            **options,
        )["m.max"]
        for shards, block in ((1, 64), (3, 7), (7, 1))
    ]
    assert np.array_equal(merged[0], merged[1]) and np.array_equal(merged[0], merged[2])


def test_rank_deficient_and_constant_designs_are_errors(study):
    x, age, nuisance = study
    with pytest.raises(UserError, match="rank-deficient"):
        compute(x, test="regression", covariate=age, nuisance=np.column_stack([nuisance, 2 * age + 1]))
    with pytest.raises(UserError, match="same for every subject"):
        compute(x, test="regression", covariate=np.ones(x.shape[0]), nuisance=nuisance)
    with pytest.raises(UserError, match="more subjects than parameters"):
        compute(x[:4], test="regression", covariate=age[:4], nuisance=nuisance[:4])


def test_categorical_covariates_become_indicator_columns():
    subjects = ["01", "02", "03", "04", "05", "06"]
    values = {
        "age": dict(zip(subjects, ["31", "45", "28", "52", "39", "60"])),  # text from participants.tsv reads as numbers
        "site": dict(zip(subjects, ["north", "south", "east", "north", "south", "east"])),
    }
    coded = code_design(values, subjects, tested="age", nuisance=["site"], where="s.yaml contrasts[0]")
    assert coded.covariate == (31.0, 45.0, 28.0, 52.0, 39.0, 60.0)
    assert coded.nuisance_columns == ("site=north", "site=south")  # reference level: east, the first in order
    assert coded.nuisance == ((1.0, 0.0), (0.0, 1.0), (0.0, 0.0), (1.0, 0.0), (0.0, 1.0), (0.0, 0.0))
    assert "reference level east" in coded.terms[1]


def test_missing_values_and_collinear_covariates_are_named():
    subjects = ["01", "02", "03", "04", "05"]
    values = {
        "age": {"01": 30, "02": 40, "03": "n/a", "04": 22, "05": 35},
        "months": {"01": 360, "02": 480, "03": 300, "04": 264, "05": 420},
        "score": {"01": 1, "02": 5, "03": 2, "04": 3, "05": 4},
    }
    with pytest.raises(UserError, match="subject 03 has no value of covariate 'age'"):
        code_design(values, subjects, tested="age", nuisance=[], where="s.yaml contrasts[0]")
    values["age"]["03"] = 25
    with pytest.raises(UserError, match="age and months are collinear"):
        code_design(values, subjects, tested="score", nuisance=["age", "months"], where="s.yaml contrasts[0]")
    values["site"] = dict.fromkeys(subjects, "A")
    with pytest.raises(UserError, match="'site' is 'A' for every analysed subject"):
        code_design(values, subjects, tested="age", nuisance=["site"], where="s.yaml contrasts[0]")


def test_kernel_sums_each_row_in_subject_order_whatever_the_padding():
    # The kernel's claim: every weighted sum is the plain left-to-right sum over subjects (common practice, no source).
    rng = np.random.default_rng(5)
    for n, b, k in ((24, 9, 3), (11, 2, 1), (5, 3, 2)):
        e = rng.standard_normal((n, 700))
        ss = (e**2).sum(axis=0) + 10.0
        w = rng.standard_normal((b, k, n)) / (2 * n)
        sums = np.zeros((b, k, 700))
        for i in range(n):  # numpy elementwise float64: each term added in subject order
            sums = sums + w[:, :, i, None] * e[i]
        expected = (sums[:, 0] * np.sqrt(7.0) / np.sqrt(np.maximum(ss - (sums**2).sum(axis=1), 0.0))).astype(np.float32)
        assert np.isfinite(expected).all()
        n_pad, v_pad = -(-n // SUBJECTS_PER_PASS) * SUBJECTS_PER_PASS, -(-b * k // VECTORS_PER_PASS) * VECTORS_PER_PASS
        weights, residuals = np.zeros((v_pad, n_pad)), np.zeros((n_pad, 700))
        weights[: b * k, :n], residuals[:n] = w.reshape(b * k, n), e
        out = np.empty((b, 700), dtype=np.float32)
        _freedman_lane_t(weights, residuals, ss, 7.0, k, out)
        assert np.array_equal(out, expected)


def test_every_collector_is_bit_identical_across_shards(study):
    x, age, nuisance = study
    x = x[:, :40]
    table = make_table("regression", n_subjects=x.shape[0], permutations=49, seed=4)
    observed = {"stat": compute(x, test="regression", covariate=age, nuisance=nuisance).stat, "tail": "two-sided"}
    observed["forming_threshold.cluster"] = np.array(2.0)
    specs = (
        ExceedanceNullSettings(key="exceed"),
        StepDownNullSettings(key="step"),
        ClusterNullSettings(key="cluster", cluster_stat="mass", dims=("freq", "time"), min_supra_neighbors=0),
        TFCENullSettings(key="tfce", E=0.5, H=2.0, step=None, dims=("freq", "time")),
    )
    graph = (np.zeros(2, dtype=np.int32), np.zeros(0, dtype=np.int32))

    def collectors():
        return make_collectors(specs, observed=observed, shape=(1, 5, 8), graph=graph)

    options = {"test": "regression", "covariate": age, "nuisance": nuisance}
    one = run_shards(x, table, n_shards=1, make_collectors=collectors, **options)
    three = run_shards(x, table, n_shards=3, make_collectors=collectors, block_size=5, **options)
    assert one.keys() == three.keys() and len(one) >= 5
    for key in one:
        assert np.array_equal(one[key], three[key]), key
