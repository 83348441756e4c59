"""Hand-off end to end: one tiny study run in two folders with different shard counts gives
identical results by `famwise compare`; then one input file, one setting and the seed change in
turn, and each comparison names that cause (and nothing else)."""

import shutil

import numpy as np
import pytest

from famwise.cli import main

from conftest import write_tiny_study, write_tiny_subject

CORRECTIONS = "- method: bonferroni\n- method: max-stat\n"


def _run(spec) -> None:
    assert main(["run", str(spec), "--cores", "2"]) == 0


def _keep(spec, name: str):
    """Copy of the run's provenance record, kept for a later comparison."""
    kept = spec.parent.parent / f"{name}.json"
    shutil.copyfile(spec.parent / "results" / "report" / "provenance.json", kept)
    return kept


def _compare(capsys, first, second) -> tuple[int, str]:
    capsys.readouterr()
    code = main(["compare", str(first), str(second)])
    return code, capsys.readouterr().out


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    """The study run in folder a (2 shards) and in folder b (1 shard)."""
    root = tmp_path_factory.mktemp("handoff")
    # 40 random sign flips of 6 subjects: fewer than the 64 distinct ones, so the seed matters
    spec_a = write_tiny_study(root / "a", corrections=CORRECTIONS, permutations=40)
    shutil.copytree(root / "a", root / "b")
    spec_b = root / "b" / "study.yaml"
    spec_b.write_text(spec_b.read_text().replace("shards: 2", "shards: 1"))
    _run(spec_a)
    _run(spec_b)
    return spec_a, spec_b


@pytest.mark.workflow
def test_two_folders_and_shard_counts_give_identical_results(two_runs, capsys):
    spec_a, spec_b = two_runs
    code, text = _compare(capsys, spec_a.parent / "results" / "report" / "provenance.json", spec_b)
    assert code == 0, text
    assert "high-vs-low: statistics, bonferroni, max-stat: identical" in text
    assert "all 3 results identical" in text
    assert "note: inference.shards 2 -> 1 (results do not depend on these)" in text
    assert len(text.splitlines()) <= 6  # short enough for an e-mail
    fingerprints = [(s.parent / "results" / "report" / "index.html").read_text() for s in two_runs]
    record = (spec_a.parent / "results" / "report" / "provenance.json").read_text()
    shown = record.split('"results_fingerprint": "')[1][:12]
    assert all(f"results fingerprint {shown}" in page for page in fingerprints)


@pytest.mark.workflow
def test_changed_input_setting_and_seed_are_each_named(two_runs, capsys):
    spec_a, spec_b = two_runs
    before = _keep(spec_b, "b-0")

    write_tiny_subject(spec_b.parent / "data" / "sub-03.npz", np.random.default_rng(99))
    _run(spec_b)
    after_input = _keep(spec_b, "b-1")
    code, text = _compare(capsys, before, after_input)
    assert code == 1
    assert "high-vs-low/statistics: different (" in text
    assert "high-vs-low/bonferroni: different (" in text
    for line in text.splitlines()[2:-1]:
        assert line.endswith(": input data/sub-03.npz changed"), text

    spec_b.write_text(spec_b.read_text().replace("alpha: 0.05", "alpha: 0.01"))
    _run(spec_b)
    after_alpha = _keep(spec_b, "b-2")
    code, text = _compare(capsys, after_input, after_alpha)
    assert code == 1
    assert "high-vs-low: statistics: identical" in text
    assert "high-vs-low/bonferroni: different (" in text and "threshold" in text
    assert "input" not in text and "seed" not in text
    for line in text.splitlines():
        if ": different (" in line:
            assert line.endswith(": inference.alpha 0.05 -> 0.01"), text

    spec_b.write_text(spec_b.read_text().replace("seed: 7", "seed: 8"))
    _run(spec_b)
    code, text = _compare(capsys, after_alpha, _keep(spec_b, "b-3"))
    assert code == 1
    assert "high-vs-low: statistics, bonferroni: identical" in text  # no permutation null in these
    assert "high-vs-low/max-stat: different (" in text
    assert text.splitlines()[-2].endswith(": seed 7 -> 8"), text
    assert "1 of 3 results differ" in text
