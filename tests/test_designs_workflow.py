"""End to end from a spec: a 2x2 within-subject interaction, a group x condition interaction and three groups."""

import numpy as np
import pytest
import scipy.stats

import famwise.io
from famwise.calibrate.table import read_table
from famwise.cli import main

CONDITIONS = ("a-hi", "a-lo", "b-hi", "b-lo")
CHANNELS = ["Fz", "FC1", "FC2", "Cz", "C3", "C4", "Pz", "Oz"]

SPEC = """\
version: 1
name: designs study
seed: 3
subjects:
  source: epochs
  path: data/sub-{subject}.npz
  min_epochs: 5
  groups: {'01': early, '02': middle, '03': late, '04': early, '05': middle, '06': late, '07': early, '08': middle, '09': late}
conditions:
  a-hi: [a-hi]
  a-lo: [a-lo]
  b-hi: [b-hi]
  b-lo: [b-lo]
decomposition:
  frequencies: {lowest_hz: 6, highest_hz: 14, count: 3, spacing: linear}
  cycles: 3
  time_step_ms: 50
  baseline: {mode: db, window_ms: [-400, -200]}
contrasts:
  - name: interaction
    test: weighted
    conditions: [a-hi, a-lo, b-hi, b-lo]
    weights: [1, -1, -1, 1]
  - name: group-by-load
    test: two-sample
    conditions: [a-hi, a-lo]
    groups: [early, late]
  - name: three-groups
    test: between-groups
    conditions: [a-hi]
    groups: [early, middle, late]
inference:
  permutations: 2000
  corrections:
    - method: max-stat
    - method: cluster
      forming_p: 0.05
"""


def write_subject(path, rng, shift: float) -> None:
    """Invented epochs: noise plus a 7 Hz burst on Fz/FC1/FC2 whose size depends on the condition and on ``shift``."""
    times = np.arange(-0.6, 1.0, 0.01)
    labels = [c for c in CONDITIONS for _ in range(8)]
    data = rng.normal(scale=5e-6, size=(len(labels), len(CHANNELS), times.size))
    envelope = np.exp(-0.5 * ((times - 0.4) / 0.12) ** 2)
    size = {"a-hi": 2.5 + shift, "a-lo": 0.5, "b-hi": 1.0, "b-lo": 0.8}
    for epoch, label in enumerate(labels):
        burst = size[label] * 5e-6 * envelope * np.cos(2 * np.pi * 7 * times + rng.uniform(0, 2 * np.pi))
        data[epoch, :3] += burst
    famwise.io.save_epochs(
        path, data, sample_rate_hz=100.0, epoch_start_s=float(times[0]), channels=CHANNELS, event_labels=labels
    )


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("designs")
    (folder / "data").mkdir()
    rng = np.random.default_rng(5)
    for number in range(1, 10):
        write_subject(folder / "data" / f"sub-{number:02d}.npz", rng, shift=1.5 * ((number - 1) % 3))
    spec = folder / "study.yaml"
    spec.write_text(SPEC)
    assert main(["run", str(spec), "--cores", "2"]) == 0
    return spec


def _load(study, name):
    out = study.parent / "results" / "contrasts" / name
    with np.load(out / "subjects.npz") as subjects, np.load(out / "observed.npz") as observed:
        return {k: subjects[k] for k in subjects.files}, {k: observed[k] for k in observed.files}


@pytest.mark.workflow
def test_check_explains_each_design(study, capsys):
    assert main(["check", str(study)]) == 0
    out = capsys.readouterr().out
    assert "interaction: weighted, interaction: (a-hi - a-lo) - (b-hi - b-lo), 9 subjects, 2^9 sign flips: exact" in out
    assert (
        "group-by-load: two-sample, group x condition interaction: early minus late on a-hi minus a-lo, 6 subjects "
        "(early 3, late 3), 6! / (3! 3!) group relabellings: exact" in out
    )
    assert "three-groups: between-groups, group differences (F over groups early, middle, late) on a-hi" in out
    assert "9! / (3! 3! 3!) group relabellings: exact (all 1680)" in out


@pytest.mark.workflow
def test_statistics_follow_the_library(study):

    subjects, observed = _load(study, "interaction")
    assert subjects["x"].ndim == 2 and str(observed["test"]) == "weighted"
    # scipy.stats.ttest_1samp on each subject's weighted sum
    expected = scipy.stats.ttest_1samp(subjects["x"].astype(np.float64), 0.0, axis=0).statistic
    np.testing.assert_allclose(observed["stat"].reshape(-1), expected, rtol=1e-5)
    subjects, observed = _load(study, "group-by-load")
    x, groups = subjects["x"].astype(np.float64), subjects["groups"]
    # scipy.stats.ttest_ind on each subject's a-hi minus a-lo
    expected = scipy.stats.ttest_ind(x[groups == 0], x[groups == 1], axis=0).statistic
    np.testing.assert_allclose(observed["stat"].reshape(-1), expected, rtol=1e-5)
    subjects, observed = _load(study, "three-groups")
    x, groups = subjects["x"].astype(np.float64), subjects["groups"]
    # scipy.stats.f_oneway over the three groups
    expected = scipy.stats.f_oneway(*[x[groups == g] for g in range(3)], axis=0).statistic
    np.testing.assert_allclose(observed["stat"].reshape(-1), expected, rtol=1e-5)


@pytest.mark.workflow
def test_methods_state_each_design(study):
    text = (study.parent / "results" / "report" / "methods.md").read_text()
    assert "Contrast interaction (interaction: (a-hi - a-lo) - (b-hi - b-lo))" in text
    assert "flipped the sign of each participant's map" in text
    assert "group early was compared with group late" in text
    assert "one-way between-subject F test (df 2 and 6; Fisher 1925)" in text
    assert "Fisher RA (1925)" in text and "Nichols TE, Holmes AP (2002)" in text
    assert "enumerated all 512 sign-flip" in text and "enumerated all 1680 label" in text


@pytest.mark.workflow
def test_values_tables_and_report_name_each_design(study):
    out = study.parent / "results"
    for name, column in (("interaction", "(a-hi - a-lo) - (b-hi - b-lo)"), ("group-by-load", "a-hi minus a-lo")):
        sidecar = (out / "contrasts" / name / "cluster" / "subject_values.json").read_text()
        assert f"the value the test used ({column};" in sidecar
    lines = (out / "contrasts" / "three-groups" / "cluster" / "subject_values.tsv").read_text().splitlines()
    assert lines[0].split("\t")[5] == "group" and len(lines) > 1
    page = (out / "report" / "index.html").read_text()
    assert "weighted, interaction: (a-hi - a-lo) - (b-hi - b-lo), t statistic" in page
    assert "between-groups, group differences (F over groups early, middle, late) on a-hi, F statistic" in page


@pytest.mark.workflow
def test_calibrate_runs_each_design(study):
    options = ["--datasets", "6", "--shards", "2", "--permutations", "15", "--cores", "2"]
    assert main(["calibrate", str(study), *options]) == 0
    folder = study.parent / "results" / "calibration"
    for name in ("interaction", "group-by-load", "three-groups"):
        rows = read_table(folder / f"{name}.tsv")
        assert [r["correction"] for r in rows] == ["uncorrected", "max-stat", "cluster"]
        assert all(r["datasets"] == 6 for r in rows)
