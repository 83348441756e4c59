"""Weighted within-subject contrasts, the group x condition interaction and the between-groups F.

Statistics against named library functions, the permutation engine against
the slow reference (`famwise.naive.stats`) under exact enumeration, and the
spec's checks of weights and groups.
"""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats as sps

from famwise.errors import UserError
from famwise.naive.stats import distinct_label_assignments, null_stats, weighted_sums
from famwise.nulls.collectors.exceedance import ExceedanceCollector, permutation_p
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import iter_null_blocks, run_shard, run_shards
from famwise.nulls.tables import make_table, smallest_attainable_p
from famwise.spec import load_study
from famwise.stats import compute, forming_threshold

RNG = np.random.default_rng(18)
MAPS = RNG.standard_normal((9, 4, 13)) + np.array([0.6, 0.0, 0.0, 0.2])[None, :, None]
INTERACTION = (1.0, -1.0, -1.0, 1.0)
THREE_GROUPS = np.array([0, 1, 2, 0, 1, 2, 0, 1, 2])
UNEQUAL_GROUPS = np.array([0, 0, 1, 1, 1, 2, 2, 2, 2])


# --- observed statistics against library functions ---------------------------------------------


def test_weighted_t_equals_scipy_on_the_weighted_sums():
    values = weighted_sums(MAPS, INTERACTION)
    result = compute(values, test="weighted")
    # scipy.stats.ttest_1samp on each subject's weighted sum
    ref = sps.ttest_1samp(values, 0.0, axis=0)
    np.testing.assert_allclose(result.stat, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(result.p, ref.pvalue, rtol=1e-10)
    assert float(result.df) == 8


def test_interaction_t_equals_scipy_ttest_ind_on_the_differences():
    groups = np.array([0, 1, 0, 1, 1, 0, 1, 0, 1])
    differences = weighted_sums(MAPS[:, :2], (1.0, -1.0))
    result = compute(differences, test="two-sample", groups=groups)
    # scipy.stats.ttest_ind (Student) on each subject's first minus second condition
    ref = sps.ttest_ind(differences[groups == 0], differences[groups == 1], axis=0)
    np.testing.assert_allclose(result.stat, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(result.p, ref.pvalue, rtol=1e-10)


@pytest.mark.parametrize("groups", [THREE_GROUPS, UNEQUAL_GROUPS])
def test_between_groups_f_equals_scipy_f_oneway(groups):
    x = MAPS[:, 0] + 0.5 * groups[:, None]
    result = compute(x, test="between-groups", groups=groups)
    # scipy.stats.f_oneway, one sample per group
    ref = sps.f_oneway(*[x[groups == g] for g in range(3)], axis=0)
    np.testing.assert_allclose(result.stat, ref.statistic, rtol=1e-12)
    np.testing.assert_allclose(result.p, ref.pvalue, rtol=1e-10)
    np.testing.assert_array_equal(result.df, [2.0, 6.0])
    assert result.effective_tail == "greater"
    # eta squared = SS_between / SS_total and the range of the group means (from memory)
    means = np.stack([x[groups == g].mean(axis=0) for g in range(3)])
    ss_between = sum(np.sum(groups == g) * (means[g] - x.mean(axis=0)) ** 2 for g in range(3))
    np.testing.assert_allclose(result.effect_size, ss_between / ((x - x.mean(axis=0)) ** 2).sum(axis=0))
    np.testing.assert_allclose(result.effect, means.max(axis=0) - means.min(axis=0))
    # scipy.stats.f.isf at (k - 1, n - k)
    assert forming_threshold(0.05, test="between-groups", df=result.df, tail="two-sided") == pytest.approx(
        sps.f.isf(0.05, 2, 6)
    )


def test_between_groups_bad_labels():
    x = MAPS[:, 0]
    with pytest.raises(UserError, match="group 0 has 1 subject; the between-groups test needs at least 2 per group"):
        compute(x, test="between-groups", groups=np.array([0, 1, 1, 1, 1, 2, 2, 2, 2]))
    with pytest.raises(UserError, match="k >= 3"):
        compute(x, test="between-groups", groups=np.array([0, 0, 0, 0, 1, 1, 1, 1, 1]))
    with pytest.raises(UserError, match="yuen"):
        compute(x, test="between-groups", groups=THREE_GROUPS, statistic="yuen")


# --- permutation tables ----------------------------------------------------------------------


@pytest.mark.parametrize("groups", [np.array([0, 1, 2, 0, 1, 2]), np.array([0, 0, 1, 1, 1, 2, 2])])
def test_between_groups_exact_table_lists_every_assignment_once(groups):
    table = make_table("between-groups", n_subjects=groups.size, permutations=10**5, seed=0, groups=groups)
    labels = {tuple(groups[row].tolist()) for row in table.rows}
    # every distinct label vector from all n! orders (by hand, common practice, no source)
    expected = distinct_label_assignments(groups)
    sizes = np.bincount(groups)
    multinomial = math.factorial(groups.size) // math.prod(math.factorial(int(s)) for s in sizes)
    assert table.exact and table.n_rows == table.n_distinct == len(labels) == len(expected) == multinomial
    assert labels == expected
    np.testing.assert_array_equal(table.rows[0], np.arange(groups.size))
    assert table.scheme == "label" and table.n_mirrored == 0


def test_between_groups_table_exact_boundary_and_ties():
    groups = np.array([0, 1, 2, 0, 1, 2])  # 6! / (2! 2! 2!) = 90 assignments; 3! of them only rename groups
    assert make_table("between-groups", n_subjects=6, permutations=89, seed=1, groups=groups).exact
    table = make_table("between-groups", n_subjects=6, permutations=88, seed=1, groups=groups)
    assert not table.exact and table.n_rows == 89
    exact = make_table("between-groups", n_subjects=6, permutations=89, seed=1, groups=groups)
    assert exact.n_identical == 6
    assert smallest_attainable_p(exact, tail="greater") == 6 / 90
    x = RNG.standard_normal((6, 40))
    null = np.concatenate(list(iter_null_blocks(x, exact.rows, test="between-groups", groups=groups)))
    # the 6 renamings of the groups tie with the identity bit for bit at every point
    assert int(np.sum(np.all(null == null[0], axis=1))) == 6
    unequal = make_table(
        "between-groups", n_subjects=7, permutations=10**4, seed=1, groups=np.array([0, 0, 1, 1, 2, 2, 2])
    )
    assert unequal.n_identical == 2


def test_weighted_uses_sign_flips():
    table = make_table("weighted", n_subjects=9, permutations=10**4, seed=0)
    assert table.scheme == "sign-flip" and table.exact and table.n_rows == 2**9


# --- the engine against the slow reference ----------------------------------------------------


DESIGNS = {
    "weighted t": (dict(test="weighted"), lambda: weighted_sums(MAPS, INTERACTION)),
    "weighted yuen": (dict(test="weighted", statistic="yuen"), lambda: weighted_sums(MAPS, (2.0, -1.0, -1.0, 0.0))),
    "interaction": (
        dict(test="two-sample", groups=np.array([0, 1, 0, 1, 1, 0, 1, 0, 1])),
        lambda: weighted_sums(MAPS[:, :2], (1.0, -1.0)),
    ),
    "between-groups equal": (dict(test="between-groups", groups=THREE_GROUPS), lambda: MAPS[:, 0]),
    "between-groups unequal": (dict(test="between-groups", groups=UNEQUAL_GROUPS), lambda: MAPS[:, 3]),
}


def table_of(options, n, permutations):
    return make_table(options["test"], n_subjects=n, permutations=permutations, seed=3, groups=options.get("groups"))


@pytest.mark.parametrize("name", list(DESIGNS))
@pytest.mark.parametrize("permutations", [60, 10**5])
def test_fast_null_equals_reference(name, permutations):
    options, data = DESIGNS[name]
    x = data()
    table = table_of(options, x.shape[0], permutations)
    assert table.exact == (permutations == 10**5)
    fast = np.concatenate(list(iter_null_blocks(x, table.rows, block_size=37, **options)))
    ref = null_stats(x, table.rows, **options)
    np.testing.assert_allclose(fast, ref, rtol=2e-6, atol=1e-6)
    np.testing.assert_allclose(fast[0], compute(x, **options).stat, rtol=2e-6, atol=1e-6)


@pytest.mark.parametrize("name", ["between-groups equal", "between-groups unequal", "weighted t"])
def test_null_identical_for_shards_and_block_sizes(name):
    options, data = DESIGNS[name]
    x = data()
    table = table_of(options, x.shape[0], 200)
    observed = compute(x, **options)

    def make():
        return [ExceedanceCollector(observed.stat, tail=observed.effective_tail), MaxStatCollector(tail="greater")]

    base = run_shards(x, table, n_shards=1, make_collectors=make, block_size=64, **options)
    for n_shards, block_size in [(7, 1), (3, 5)]:
        other = run_shards(x, table, n_shards=n_shards, make_collectors=make, block_size=block_size, **options)
        for key in base:
            assert base[key].tobytes() == other[key].tobytes(), (key, n_shards, block_size)


def test_between_groups_null_identical_for_thread_counts_and_point_tiles(monkeypatch):
    import numba

    import famwise.nulls.between_block as between_block

    x = RNG.standard_normal((9, 3000))
    table = table_of(dict(test="between-groups", groups=UNEQUAL_GROUPS), 9, 100)
    options = dict(test="between-groups", groups=UNEQUAL_GROUPS)
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        one = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        two = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
    finally:
        numba.set_num_threads(threads)
    monkeypatch.setattr(between_block, "_TILE", 77)
    tiled = np.concatenate(list(iter_null_blocks(x, table.rows, block_size=13, **options)))
    assert one.tobytes() == two.tobytes() == tiled.tobytes()


def exact_p(x, options, tail):
    table = table_of(options, x.shape[0], 10**6)
    assert table.exact
    observed = compute(x, tail=tail, **options)
    collector = ExceedanceCollector(observed.stat, tail=observed.effective_tail)
    arrays = run_shard(x, table.rows, collectors=[collector], **options)
    return permutation_p(arrays["exceed.count"], table.n_rows)


def test_exact_between_groups_equals_scipy_permutation_test():
    groups = np.array([0, 1, 2, 0, 1, 2, 0, 1])
    x = RNG.standard_normal((8, 3)) + 0.9 * groups[:, None]
    p = exact_p(x, dict(test="between-groups", groups=groups), "two-sided")
    for point in range(3):
        # scipy.stats.permutation_test, permutation_type='independent', every distinct split into the 3 groups
        ref = sps.permutation_test(
            tuple(x[groups == g, point] for g in range(3)),
            lambda *samples, axis=-1: sps.f_oneway(*samples, axis=axis).statistic,
            permutation_type="independent",
            n_resamples=np.inf,
            alternative="greater",
            vectorized=True,
        )
        assert p[point] == pytest.approx(ref.pvalue, rel=1e-12)


def test_exact_weighted_equals_scipy_permutation_test():
    values = weighted_sums(MAPS[:, :, :3], INTERACTION)
    p = exact_p(values, dict(test="weighted"), "two-sided")
    for point in range(3):
        # scipy.stats.permutation_test, permutation_type='samples' (sign flips of a one-sample statistic)
        ref = sps.permutation_test(
            (values[:, point],),
            lambda u, axis=-1: sps.ttest_1samp(u, 0.0, axis=axis).statistic,
            permutation_type="samples",
            n_resamples=np.inf,
            alternative="two-sided",
            vectorized=True,
        )
        assert p[point] == pytest.approx(ref.pvalue, rel=1e-12)


# --- the spec ---------------------------------------------------------------------------------

SPEC = """\
version: 1
name: designs
subjects:
  source: epochs
  path: data/sub-{subject}.npz
  groups: {'01': young, '02': middle, '03': old}
conditions:
  a-hi: [ah]
  a-lo: [al]
  b-hi: [bh]
  b-lo: [bl]
contrasts:
  - name: c
CONTRAST
inference:
  corrections:
    - method: holm
"""


def spec_error(tmp_path: Path, contrast: str) -> str:
    spec = tmp_path / "study.yaml"
    spec.write_text(SPEC.replace("CONTRAST\n", contrast))
    with pytest.raises(UserError) as caught:
        load_study(spec)
    return str(caught.value)


def spec_loads(tmp_path: Path, contrast: str):
    spec = tmp_path / "study.yaml"
    spec.write_text(SPEC.replace("CONTRAST\n", contrast))
    return load_study(spec).study.contrasts[0]


def test_spec_accepts_the_new_designs(tmp_path):
    interaction = "    test: weighted\n    conditions: [a-hi, a-lo, b-hi, b-lo]\n    weights: [1, -1, -1, 1]\n"
    assert spec_loads(tmp_path, interaction).weights == [1.0, -1.0, -1.0, 1.0]
    against_zero = "    test: weighted\n    conditions: [a-hi]\n    weights: [0.5]\n"
    assert spec_loads(tmp_path, against_zero).weights == [0.5]
    group_by_condition = "    test: two-sample\n    conditions: [a-hi, a-lo]\n    groups: [young, old]\n"
    assert spec_loads(tmp_path, group_by_condition).weights is None
    k_groups = "    test: between-groups\n    conditions: [a-hi]\n    groups: [young, middle, old]\n"
    assert spec_loads(tmp_path, k_groups).groups == ["young", "middle", "old"]


@pytest.mark.parametrize(
    "contrast, message",
    [
        (
            "    test: weighted\n    conditions: [a-hi, a-lo, b-hi]\n    weights: [1, -1, 1]\n",
            "study.yaml:16 contrasts[0].weights: contrast 'c': weights over 3 conditions must sum to zero (they sum to 1)",
        ),
        (
            "    test: weighted\n    conditions: [a-hi, a-lo]\n    weights: [1, -1, 1]\n",
            "contrast 'c': 3 weights for 2 conditions",
        ),
        ("    test: weighted\n    conditions: [a-hi, a-lo]\n", "contrast 'c': test 'weighted' needs one weight"),
        (
            "    test: paired\n    conditions: [a-hi, a-lo]\n    weights: [1, -1]\n",
            "weights are used by 'weighted', 'two-sample', 'between-groups' and 'regression', not 'paired'",
        ),
        (
            "    test: two-sample\n    conditions: [a-hi, a-lo, b-hi]\n    groups: [young, old]\n",
            "test 'two-sample' with 3 conditions needs weights",
        ),
        (
            "    test: between-groups\n    conditions: [a-hi]\n    groups: [young, old]\n",
            "contrast 'c': test 'between-groups' needs three or more groups",
        ),
        (
            "    test: between-groups\n    conditions: [a-hi]\n    groups: [young, old, elder]\n",
            "unknown group 'elder'",
        ),
    ],
)
def test_spec_errors_name_the_contrast_and_line(tmp_path, contrast, message):
    assert message in spec_error(tmp_path, contrast)


# --- the design in words ----------------------------------------------------------------------


def test_designs_in_words():
    from famwise.contrast_words import design_words, heading_words, resampling_words, weighted_formula

    assert weighted_formula(["a", "b", "c"], [2, -1, -1]) == "2 x a - b - c"
    assert weighted_formula(["a", "b", "c"], [-0.5, 0, 0.5]) == "-0.5 x a + 0.5 x c"
    assert weighted_formula(["a"], [1]) == "a"
    assert design_words("weighted", ["x", "y"], weights=[1, -1]) == "x minus y against zero"
    assert design_words("two-sample", ["x"], groups=["p", "c"]) == "group difference: p minus c on x"
    assert heading_words({"test": "paired", "conditions": ["x", "y"]}) == "x − y"
    assert (
        heading_words({"test": "repeated-measures", "conditions": ["x", "y", "z"]}) == "conditions x, y, z differ (F)"
    )
    regression = {"test": "regression", "conditions": ["x", "y"], "covariate": "age", "nuisance": ["sex"]}
    assert heading_words(regression) == "(x - y) ~ age + sex, testing age"
    assert heading_words(regression | {"conditions": ["x"], "nuisance": None}) == "x ~ age, testing age"
    assert resampling_words("label", 9, group_sizes=[3, 3, 3]) == "9! / (3! 3! 3!) group relabellings"


def test_check_names_a_between_groups_group_too_small(tmp_path):
    from famwise.plan import Plan
    from famwise.preflight.spec_checks import check_group_sizes
    from famwise.preflight.where import Where

    spec = tmp_path / "study.yaml"
    text = SPEC.replace(
        "CONTRAST\n", "    test: between-groups\n    conditions: [a-hi]\n    groups: [young, middle, old]\n"
    )
    spec.write_text(
        text.replace("  groups:", "  ids: ['01', '02', '03', '04', '05']\n  groups:", 1).replace(
            "'03': old}", "'03': old, '04': young, '05': middle}"
        )
    )
    plan = Plan(load_study(spec))
    with pytest.raises(
        UserError,
        match=r"study.yaml:\d+ contrasts\[0\].groups: group 'old' has 1 analysed subject \(03\); "
        r"the between-groups test needs at least 2 per group",
    ):
        check_group_sizes(plan, Where(plan.loaded))


def test_between_f_kernel_source_gives_the_compiled_bits(monkeypatch):
    """The kernel run as Python (every index checked) gives the compiled kernel's bits."""
    import famwise.nulls.between_block as between_block
    from famwise.kernels.between_f import _between_f

    x = RNG.standard_normal((9, 50))
    options = dict(test="between-groups", groups=UNEQUAL_GROUPS)
    table = table_of(options, 9, 30)
    compiled = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
    monkeypatch.setattr(between_block, "_between_f", getattr(_between_f, "py_func", _between_f))
    python = np.concatenate(list(iter_null_blocks(x, table.rows, **options)))
    assert python.tobytes() == compiled.tobytes()


def test_check_refuses_yuen_for_the_between_groups_f(tmp_path):
    from famwise.plan import Plan
    from famwise.preflight.spec_checks import check_statistic
    from famwise.preflight.where import Where

    spec = tmp_path / "study.yaml"
    text = SPEC.replace(
        "CONTRAST\n", "    test: between-groups\n    conditions: [a-hi]\n    groups: [young, middle, old]\n"
    )
    spec.write_text(text.replace("inference:\n", "inference:\n  statistic: yuen\n"))
    plan = Plan(load_study(spec))
    with pytest.raises(
        UserError, match=r"study.yaml:\d+ inference.statistic: 'yuen' .* not for contrast c's 'between-groups'"
    ):
        check_statistic(plan, Where(plan.loaded))


def test_every_renaming_of_equal_size_groups_ties_bit_for_bit():
    groups = np.array([0, 1, 2, 0, 1, 2, 3, 3])  # three groups of 2 and one of 2: 4! renamings per partition
    table = make_table("between-groups", n_subjects=8, permutations=10**5, seed=0, groups=groups)
    assert table.exact and table.n_rows == 2520 and table.n_identical == 24
    x = RNG.standard_normal((8, 60)) * np.exp(RNG.standard_normal(60))
    null = np.concatenate(list(iter_null_blocks(x, table.rows, block_size=100, test="between-groups", groups=groups)))
    partitions = {}
    for r, labels in enumerate(groups[table.rows]):
        key = frozenset(frozenset(np.flatnonzero(labels == g).tolist()) for g in range(4))
        partitions.setdefault(key, []).append(r)
    assert len(partitions) == 2520 // 24 and all(len(rows) == 24 for rows in partitions.values())
    for rows in partitions.values():  # F does not depend on which label a group carries (from memory)
        assert all(null[r].tobytes() == null[rows[0]].tobytes() for r in rows)


def test_methods_state_the_repeated_measures_f_and_its_within_subject_permutations():
    from types import SimpleNamespace

    from famwise.report.methods import _contrast, kinds_used

    spec = {"name": "load", "test": "repeated-measures", "conditions": ["low", "mid", "high"]}
    contrast = SimpleNamespace(name="load", test="repeated-measures", statistic="t", n=12, tail="greater")
    text = _contrast(contrast, spec, {"inference": {}})
    assert "t test" not in text
    # df k - 1 and (n - 1)(k - 1) of the one-way repeated-measures F (Fisher 1925)
    assert "one-way repeated-measures F test (df 2 and 22; Fisher 1925), upper tail, across n = 12" in text
    assert "permuted the condition labels within each participant" in text
    run = SimpleNamespace(study={"decomposition": {"method": "none"}, "contrasts": [spec]}, contrasts=[])
    assert {"anova", "permutation"} <= set(kinds_used(run))


def test_report_heading_words_an_f_by_its_size_not_its_sign():
    from types import SimpleNamespace

    from famwise.report.sections import _sign_words

    spec = {"test": "between-groups", "conditions": ["a"], "groups": ["x", "y", "z"]}
    f = SimpleNamespace(test="between-groups", statistic="t")
    assert _sign_words(f, spec) == "Larger values mean larger differences among groups x, y, z"
    paired = SimpleNamespace(test="paired", statistic="t")
    assert _sign_words(paired, {"test": "paired", "conditions": ["a", "b"]}) == "Positive values mean a &gt; b"
