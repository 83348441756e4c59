"""Real Snakemake runs of a tiny study: what reruns after each change, and the first statistics path."""

import numpy as np
import pytest
import scipy.stats
from statsmodels.stats.multitest import multipletests

from famwise.cli import main, planned_jobs
from famwise.job_benchmarks import stage_costs
from famwise.plan import Plan

from conftest import write_tiny_study, write_tiny_subject


def _jobs(spec) -> dict[str, int]:
    return {rule: count for rule, (count, _) in planned_jobs(Plan.from_spec(spec)).items()}


def _run(spec) -> None:
    assert main(["run", str(spec), "--cores", "2"]) == 0


@pytest.fixture(scope="module")
def cached_study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cached")
    spec = write_tiny_study(folder)
    assert _jobs(spec) == {
        "decompose": 6,
        "subjects_table": 1,
        "contrast_data": 1,
        "observed": 1,
        "null_shard": 2,
        "null_info": 1,
        "correct_points": 4,
        "study_record": 1,
        "report": 1,
    }
    _run(spec)
    return spec


@pytest.mark.workflow
def test_second_run_does_nothing(cached_study):
    assert _jobs(cached_study) == {}


@pytest.mark.workflow
def test_every_job_records_its_time_and_memory(cached_study, capsys):
    logs = cached_study.parent / "results" / "logs"
    assert sorted(p.name for p in (logs / "decompose").glob("*.benchmark.tsv")) == [
        f"0{k}.benchmark.tsv" for k in range(1, 7)
    ]
    jobs = {cost.stage: cost.jobs for cost in stage_costs(logs)}
    assert jobs == {
        "decompose": 6,
        "subjects_table": 1,
        "contrast_data": 1,
        "observed": 1,
        "null_shard": 2,
        "null_info": 1,
        "correct": 4,
        "study_record": 1,
        "report": 1,
    }
    assert all(cost.wall_s > 0 for cost in stage_costs(logs))
    assert main(["check", str(cached_study)]) == 0
    out = capsys.readouterr().out
    assert "Where the time went" in out and "null_shard" in out.split("Where the time went")[1]


@pytest.mark.workflow
def test_result_files_follow_the_design(cached_study):
    out = cached_study.parent / "results"
    for name in ("bonferroni", "holm", "fdr-bh", "max-stat"):
        with np.load(out / "contrasts" / "high-vs-low" / name / "result.npz") as result:
            assert {"p_corrected", "mask", "threshold", "n_significant"} <= set(result.files)
            assert result["mask"].shape == result["p_corrected"].shape
    with np.load(out / "contrasts" / "high-vs-low" / "observed.npz") as observed:
        assert {"stat", "p", "df", "effect", "effect_size", "channels", "freqs", "times", "test", "n"} <= set(
            observed.files
        )
    assert (out / "report" / "index.html").is_file()
    assert (out / "subjects.tsv").read_text().count("included") == 6


@pytest.mark.workflow
def test_t_map_and_corrections_match_references(cached_study):
    out = cached_study.parent / "results" / "contrasts" / "high-vs-low"
    with np.load(out / "subjects.npz") as subjects, np.load(out / "observed.npz") as observed:
        differences = subjects["x"].astype(np.float64)
        reference = scipy.stats.ttest_1samp(
            differences, 0.0, axis=0
        )  # scipy.stats.ttest_1samp (paired = one-sample on differences)
        stat = observed["stat"].reshape(-1)
        p = observed["p"].reshape(-1)
    np.testing.assert_allclose(stat, reference.statistic, rtol=1e-5)
    np.testing.assert_allclose(p, reference.pvalue, rtol=1e-4)
    for name, method in (("bonferroni", "bonferroni"), ("holm", "holm"), ("fdr-bh", "fdr_bh")):
        reject, adjusted, _, _ = multipletests(
            p, alpha=0.05, method=method
        )  # statsmodels.stats.multitest.multipletests
        with np.load(out / name / "result.npz") as result:
            np.testing.assert_allclose(result["p_corrected"].reshape(-1), adjusted, rtol=1e-9)
            np.testing.assert_array_equal(result["mask"].reshape(-1), reject)


@pytest.mark.workflow
def test_paired_t_equals_ttest_rel(cached_study):
    """The paired contrast equals scipy.stats.ttest_rel on the two conditions' maps."""
    out = cached_study.parent / "results"
    plan = Plan.from_spec(cached_study)
    with np.load(out / "contrasts" / "high-vs-low" / "observed.npz") as observed:
        stat = observed["stat"]
        times = observed["times"]
    high, low = [], []
    for subject in plan.subjects:
        with np.load(out / "tf" / f"sub-{subject}.npz") as tf:
            keep = np.isin(np.round(tf["times"], 6), np.round(times, 6))
            high.append(tf["values"][0][:, :, keep])
            low.append(tf["values"][1][:, :, keep])
    reference = scipy.stats.ttest_rel(
        np.array(high, dtype=np.float64), np.array(low, dtype=np.float64), axis=0
    )  # scipy.stats.ttest_rel
    np.testing.assert_allclose(stat, reference.statistic, rtol=1e-4)


@pytest.mark.workflow
def test_reruns_only_what_changed(tmp_path):
    spec = write_tiny_study(
        tmp_path, n_subjects=5, corrections="- method: holm\n- method: fdr-bh\n- method: max-stat\n"
    )
    _run(spec)
    assert _jobs(spec) == {}

    write_tiny_subject(tmp_path / "data" / "sub-06.npz", np.random.default_rng(11))
    assert _jobs(spec) == {
        "decompose": 1,
        "subjects_table": 1,
        "contrast_data": 1,
        "observed": 1,
        "null_shard": 2,
        "null_info": 1,
        "correct_points": 3,
        "report": 1,
    }
    _run(spec)

    spec.write_text(spec.read_text().replace("alpha: 0.05", "alpha: 0.01"))
    assert _jobs(spec) == {"correct_points": 3, "study_record": 1, "report": 1}
    _run(spec)

    spec.write_text(spec.read_text().replace("- method: fdr-bh", "- method: fdr-bh\n      level: 0.1"))
    assert _jobs(spec) == {"correct_points": 1, "study_record": 1, "report": 1}
    _run(spec)

    spec.write_text(spec.read_text().replace("seed: 7", "seed: 8"))
    assert _jobs(spec) == {"null_shard": 2, "null_info": 1, "correct_points": 1, "study_record": 1, "report": 1}
    _run(spec)

    spec.write_text(spec.read_text().replace("cycles: 3", "cycles: 4"))
    assert _jobs(spec) == {
        "decompose": 6,
        "subjects_table": 1,
        "contrast_data": 1,
        "observed": 1,
        "null_shard": 2,
        "null_info": 1,
        "correct_points": 3,
        "study_record": 1,
        "report": 1,
    }


@pytest.mark.workflow
def test_all_contrasts_family_equals_brute_force(tmp_path):
    """family: all-contrasts ranks both contrasts' points jointly (Westfall & Young 1993 successive maxima),
    checked against the brute-force step-down over the concatenated permutation maps (famwise.naive.stepdown)
    and Holm over the concatenated parametric p (statsmodels.stats.multitest.multipletests)."""
    from famwise.design import load_contrast
    from famwise.naive.stepdown import step_down_reference
    from famwise.nulls.engine import iter_null_blocks
    from famwise.nulls.tables import make_table

    spec = write_tiny_study(
        tmp_path, n_subjects=6, corrections="- method: holm\n- method: max-stat\n  step_down: true\n"
    )
    text = spec.read_text().replace("  shards: 2\n", "  shards: 2\n  family: all-contrasts\n")
    text = text.replace("inference:", "  - name: high-only\n    test: one-sample\n    conditions: [high]\ninference:")
    spec.write_text(text)
    assert _jobs(spec)["family_stepdown_shard"] == 2
    _run(spec)
    out = tmp_path / "results" / "contrasts"
    names = ["high-vs-low", "high-only"]
    datas = [load_contrast(out / n / "subjects.npz") for n in names]
    table = make_table("paired", n_subjects=6, permutations=63, seed=7)
    maps = np.concatenate(
        [np.concatenate(list(iter_null_blocks(d.x, table.rows, test=d.test)), axis=0) for d in datas], axis=1
    )
    observed = np.concatenate([np.load(out / n / "observed.npz")["stat"].reshape(-1) for n in names])
    expected = step_down_reference(maps, observed, tail="two-sided")
    found = np.concatenate([np.load(out / n / "max-stat" / "result.npz")["p_corrected"].reshape(-1) for n in names])
    np.testing.assert_allclose(found, expected, rtol=1e-12)
    p = np.concatenate([np.load(out / n / "observed.npz")["p"].reshape(-1) for n in names])
    holm = np.concatenate([np.load(out / n / "holm" / "result.npz")["p_corrected"].reshape(-1) for n in names])
    np.testing.assert_allclose(holm, multipletests(p, method="holm")[1], rtol=1e-9)


def test_all_contrasts_needs_a_shared_table(tmp_path):
    from famwise.errors import UserError

    spec = write_tiny_study(tmp_path, n_subjects=6)
    text = spec.read_text().replace("  shards: 2\n", "  shards: 2\n  family: all-contrasts\n")
    text = text.replace(
        "  min_epochs: 5\n", "  min_epochs: 5\n  groups: {'01': a, '02': a, '03': a, '04': b, '05': b, '06': b}\n"
    )
    text = text.replace(
        "inference:", "  - name: groups\n    test: two-sample\n    conditions: [high]\n    groups: [a, b]\ninference:"
    )
    spec.write_text(text)
    with pytest.raises(
        UserError,
        match="contrasts 'high-vs-low' \\(sign-flip, 6 subjects\\) and 'groups' \\(label, 6 subjects\\) cannot share them",
    ):
        Plan.from_spec(spec)
