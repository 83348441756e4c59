"""The command line: bad input ends in one clear line and exit status 2, with no partial results."""

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import famwise.cli
import famwise.io
from famwise.cli import main

from conftest import write_tiny_study, write_tiny_subject

# Studies of 4 subjects cannot reach alpha by permutation (2/16 > 0.05), so the error
# tests use a parametric correction only and see no attainability warning.
HOLM_ONLY = "- method: holm\n"


def famwise_cli(*args, cwd=None) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "famwise.cli", *map(str, args)], capture_output=True, text=True, cwd=cwd
    )


def _assert_one_line_error(result, *fragments):
    assert result.returncode == 2, result.stdout + result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("famwise: error: "), result.stderr
    assert "Traceback" not in result.stderr + result.stdout
    for fragment in fragments:
        assert fragment in lines[0]


def _result_files(folder):
    return sorted(
        p
        for p in (folder / "results").rglob("*")
        if p.is_file() and "logs" not in p.parts and ".snakemake" not in p.parts
    )


@pytest.mark.workflow
def test_unknown_spec_key(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("seed: 7", "sed: 7"))
    _assert_one_line_error(famwise_cli("check", spec), "study.yaml:3 sed: unknown key 'sed' (did you mean 'seed'?)")


@pytest.mark.workflow
def test_wrong_type(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("alpha: 0.05", "alpha: lots"))
    _assert_one_line_error(famwise_cli("run", spec), "inference.alpha")
    assert not (tmp_path / "results").exists()


@pytest.mark.workflow
def test_contrast_naming_a_missing_condition(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("conditions: [high, low]", "conditions: [high, lo]"))
    _assert_one_line_error(
        famwise_cli("check", spec), "contrasts[0].conditions: unknown condition 'lo' (known: high, low)"
    )


@pytest.mark.workflow
def test_subject_file_missing(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("  min_epochs: 5", "  min_epochs: 5\n  ids: ['01', '02', '09']"))
    _assert_one_line_error(famwise_cli("run", spec), "subject 09: file not found")


@pytest.mark.workflow
def test_subject_id_not_plain(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("  min_epochs: 5", "  min_epochs: 5\n  ids: ['01', 'sub 2']"))
    _assert_one_line_error(famwise_cli("check", spec), "subjects.ids: subject id 'sub 2' is not a plain identifier")


@pytest.mark.workflow
def test_channels_differ_between_subjects(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    write_tiny_subject(
        tmp_path / "data" / "sub-03.npz",
        np.random.default_rng(3),
        channels=["Fz", "FC1", "FC2", "Cz", "C3", "C4", "Pz", "POz"],
    )
    _assert_one_line_error(
        famwise_cli("run", spec, "--cores", "2"),
        "subject 03: channels differ from subject 01",
        "extra: POz",
        "missing: Oz",
    )
    assert not [p for p in _result_files(tmp_path) if "contrasts" in p.parts]


@pytest.mark.workflow
def test_sampling_rates_differ(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    write_tiny_subject(tmp_path / "data" / "sub-02.npz", np.random.default_rng(3), sample_rate_hz=200.0)
    _assert_one_line_error(
        famwise_cli("run", spec, "--cores", "2"), "subject 02: sampling rate 200 Hz differs from subject 01 (100 Hz)"
    )


@pytest.mark.workflow
def test_nan_in_data(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    path = tmp_path / "data" / "sub-02.npz"
    with np.load(path) as archive:
        arrays = {k: archive[k] for k in archive.files}
    arrays["data"][3, 1, 10] = np.nan
    famwise.io.save_epochs(
        path,
        arrays["data"],
        sample_rate_hz=float(arrays["sample_rate_hz"]),
        epoch_start_s=float(arrays["epoch_start_s"]),
        channels=list(arrays["channels"]),
        event_labels=list(arrays["event_labels"]),
    )
    _assert_one_line_error(
        famwise_cli("run", spec, "--cores", "2"), "subject 02", "sub-02.npz", "NaN or inf", "epoch 3, channel FC1"
    )
    assert not (tmp_path / "results" / "tf" / "sub-02.npz").exists()
    # the run stops: nothing after the decompositions but the spec's own record (study.json, a job
    # without inputs), and no half-written file anywhere
    assert not [p for p in _result_files(tmp_path) if p.parts[-2] != "tf" and p.name != "study.json"]
    assert not [p for p in _result_files(tmp_path) if p.name.startswith(".") or p.suffix not in (".npz", ".json")]


@pytest.mark.workflow
def test_too_few_epochs(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    spec.write_text(spec.read_text().replace("min_epochs: 5", "min_epochs: 30"))
    _assert_one_line_error(famwise_cli("run", spec, "--cores", "2"), "subjects.min_epochs", "30")


@pytest.mark.workflow
def test_baseline_outside_epoch(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    spec.write_text(spec.read_text().replace("window_ms: [-400, -200]", "window_ms: [-900, -200]"))
    _assert_one_line_error(famwise_cli("run", spec, "--cores", "2"), "baseline")


@pytest.mark.workflow
def test_analysis_window_in_cone_of_influence(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections=HOLM_ONLY)
    spec.write_text(spec.read_text().replace("channels:\n", "analysis:\n  time_ms: [-600, 900]\nchannels:\n", 1))
    _assert_one_line_error(
        famwise_cli("run", spec, "--cores", "2"),
        "analysis.time_ms: [-600.0, 900.0] ms reaches into",
        "widest window that fits is",
    )


@pytest.mark.workflow
def test_too_few_permutations_warns(tmp_path):
    spec = write_tiny_study(tmp_path, n_subjects=4, permutations=100)
    result = famwise_cli("check", spec)
    assert result.returncode == 0, result.stderr
    # 4 subjects: 16 sign flips, two-sided smallest p = 2/16 (common practice; Nichols & Holmes 2002)
    assert (
        "famwise: warning: contrast high-vs-low: the smallest attainable permutation p is 0.125 (16 all sign-flip rows"
        in result.stderr
    )


@pytest.mark.workflow
def test_debug_shows_traceback(tmp_path):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("seed: 7", "sed: 7"))
    result = famwise_cli("--debug", "check", spec)
    assert result.returncode == 2 and "Traceback" in result.stderr


@pytest.mark.workflow
def test_check_prints_plan(tiny_study):
    result = famwise_cli("check", tiny_study)
    assert result.returncode == 0, result.stderr
    assert "Subjects: 6 analysed" in result.stdout
    assert "decompose" in result.stdout and "no result yet" in result.stdout


@pytest.mark.workflow
def test_init_writes_a_valid_starter_spec(tmp_path):
    write_tiny_study(tmp_path)
    (tmp_path / "study.yaml").unlink()
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "study.yaml")]) == 0
    text = (tmp_path / "study.yaml").read_text()
    assert 'high: ["high"]' in text and 'low: ["low"]' in text
    result = famwise_cli("check", tmp_path / "study.yaml")
    assert result.returncode == 0, result.stderr


@pytest.mark.workflow
@pytest.mark.parametrize("argv", [["run", "missing.yaml"], ["check", "missing.yaml"]])
def test_missing_spec(tmp_path, argv):
    _assert_one_line_error(famwise_cli(*argv, cwd=tmp_path), "spec file not found")


@pytest.mark.parametrize(
    ("cores", "profile", "threads"),
    [(2, None, 1), (8, None, 4), (1, None, 1), (5, None, 2), (8, "local", 4), (8, "slurm", None)],
)
def test_shard_jobs_share_the_cores_on_this_machine(tmp_path, monkeypatch, cores, profile, threads):
    # a study with fewer shards than cores still uses every core; cluster jobs keep one thread each
    spec = write_tiny_study(tmp_path)  # shards: 2
    calls = []
    monkeypatch.setattr(famwise.cli, "run_snakemake", lambda plan, options, **kw: calls.append(kw) or (0, []))
    argv = ["run", str(spec), "--cores", str(cores)]
    if profile:
        argv += ["--profile", str(Path(__file__).parents[1] / "configs" / "profiles" / profile)]
    assert main(argv) == 0
    assert calls[0]["config"].get("null_threads") == threads
