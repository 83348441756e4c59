"""Paths: absolute inputs and output folders are allowed; a study folder moved or copied whole reruns nothing."""

import shutil

import pytest

from famwise.cli import main, planned_jobs
from famwise.plan import Plan
from famwise.spec import load_study

from conftest import write_tiny_study


def test_absolute_input_and_output_paths_are_allowed_with_a_note(tmp_path, capsys):
    spec = write_tiny_study(tmp_path / "study", n_subjects=4, corrections="- method: holm\n")
    data, scratch = tmp_path / "study" / "data", tmp_path / "scratch" / "results"
    text = spec.read_text().replace("path: data/sub-{subject}.npz", f"path: {data}/sub-{{subject}}.npz")
    spec.write_text(text.replace("seed: 7", f"seed: 7\noutput: {scratch}"))
    assert main(["check", str(spec)]) == 0
    out, err = capsys.readouterr()
    assert "Subjects: 4 analysed" in out
    assert f"famwise: note: {scratch} lies outside the spec's folder" in err
    assert f"famwise: note: {data}/sub-{{subject}}.npz lies outside the spec's folder" in err
    assert err.count("the spec is tied to this machine's file system") == 2
    assert not scratch.exists()


def test_relative_paths_may_not_climb_out_of_the_study_folder(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("path: data/sub-{subject}.npz", "path: ../data/sub-{subject}.npz"))
    with pytest.raises(Exception, match=r"leaves the study folder; .* or an absolute path"):
        load_study(spec)


def test_run_paths_are_relative_inside_the_study_folder(tmp_path):
    loaded = load_study(write_tiny_study(tmp_path))
    assert loaded.run_path(tmp_path / "data" / "sub-01.npz") == "../data/sub-01.npz"
    assert loaded.run_path("/elsewhere/sub-01.npz") == "/elsewhere/sub-01.npz"


@pytest.fixture(scope="module")
def finished_study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("finished") / "lab"
    spec = write_tiny_study(folder, n_subjects=4, corrections="- method: holm\n")
    assert main(["run", str(spec), "--cores", "2"]) == 0
    return spec


def _tree(folder):
    """Every path, and each file's modification time (folders change theirs with Snakemake's transient lock)."""
    return {str(p): p.stat().st_mtime_ns if p.is_file() else None for p in folder.rglob("*")}


@pytest.mark.workflow
def test_check_after_a_run_leaves_nothing_behind_and_names_the_changed_setting(finished_study, capsys):
    before = _tree(finished_study.parent)
    assert main(["check", str(finished_study)]) == 0
    assert "nothing: every result is up to date" in capsys.readouterr().out
    assert _tree(finished_study.parent) == before
    text = finished_study.read_text()
    finished_study.write_text(
        text.replace("permutations: 63", "permutations: 127").replace("alpha: 0.05", "alpha: 0.01")
    )
    try:
        assert main(["check", str(finished_study)]) == 0
        out = capsys.readouterr().out
        assert (
            "correct_points    settings changed: inference.alpha 0.05 -> 0.01, inference.permutations 63 -> 127" in out
        )
        assert "decompose" not in out
    finally:
        finished_study.write_text(text)


@pytest.mark.workflow
def test_a_moved_or_copied_study_folder_reruns_nothing(finished_study, tmp_path):
    copied = tmp_path / "copy"
    shutil.copytree(finished_study.parent, copied)  # copy2 keeps the modification times, as `cp -a` does
    assert planned_jobs(Plan.from_spec(copied / "study.yaml")) == {}
    moved = tmp_path / "moved"
    shutil.move(copied, moved)
    assert planned_jobs(Plan.from_spec(moved / "study.yaml")) == {}
