"""A tiny voltage study with every newer design end to end: check, run, report (no frequency, more than two conditions)."""

import json
import re

import numpy as np
import pytest
import scipy.stats

import famwise.io
from famwise.cli import main

from conftest import TINY_CHANNELS

CONDITIONS = ("a-hi", "a-lo", "b-hi", "b-lo")
GROUPS = ["early", "middle", "late"]
AGES = [31, 45, 28, 52, 39, 60, 24, 47, 35]
SEXES = ["F", "M", "M", "F", "F", "M", "F", "M", "F"]
SAMPLE_RATE_HZ = 100.0

SPEC = """\
version: 1
name: tiny voltage designs
seed: 5
subjects:
  source: epochs
  path: data/sub-{subject}.npz
  min_epochs: 4
  groups: GROUPS
  covariates:
    age: AGES
    sex: SEXES
conditions:
  a-hi: [a-hi]
  a-lo: [a-lo]
  b-hi: [b-hi]
  b-lo: [b-lo]
decomposition:
  method: none
  time_step_ms: 20
  baseline: {window_ms: [-200, 0]}
analysis:
  time_ms: [0, 800]
channels:
  positions: 10-10
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
  - name: age-effect
    test: regression
    conditions: [a-hi, a-lo]
    covariate: age
    nuisance: [sex]
inference:
  permutations: 199
  corrections:
    - method: cluster
      forming_p: 0.05
"""


def write_study(folder):
    """Invented epochs: a late positive wave over Pz and Cz, its size set by condition, group and age."""
    rng = np.random.default_rng(17)
    (folder / "data").mkdir(parents=True, exist_ok=True)
    times = np.arange(-0.4, 1.0, 1 / SAMPLE_RATE_HZ)
    wave = np.exp(-0.5 * ((times - 0.5) / 0.1) ** 2)
    labels = [c for c in CONDITIONS for _ in range(5)]
    for index in range(9):
        size = {"a-hi": 5.0 + 2.0 * (index % 3), "a-lo": 1.0, "b-hi": 2.0, "b-lo": 1.5}
        data = rng.normal(scale=3e-6, size=(len(labels), len(TINY_CHANNELS), times.size))
        for epoch, label in enumerate(labels):
            amplitude = (size[label] + (AGES[index] - 40) / 10 * (label == "a-hi")) * 1e-6
            for name, weight in (("Pz", 1.0), ("Cz", 0.7)):
                data[epoch, TINY_CHANNELS.index(name)] += weight * amplitude * wave
        famwise.io.save_epochs(
            folder / "data" / f"sub-{index + 1:02d}.npz",
            data,
            sample_rate_hz=SAMPLE_RATE_HZ,
            epoch_start_s=float(times[0]),
            channels=TINY_CHANNELS,
            event_labels=labels,
        )
    ids = [f"{n:02d}" for n in range(1, 10)]
    text = (
        SPEC.replace("GROUPS", json.dumps(dict(zip(ids, [GROUPS[i % 3] for i in range(9)]))))
        .replace("AGES", json.dumps(dict(zip(ids, AGES))))
        .replace("SEXES", json.dumps(dict(zip(ids, SEXES))))
    )
    (folder / "study.yaml").write_text(text)
    return folder / "study.yaml"


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    folder = tmp_path_factory.mktemp("voltage-designs")
    spec = write_study(folder)
    assert main(["run", str(spec), "--cores", "2"]) == 0
    return folder


def _load(folder, name):
    out = folder / "results" / "contrasts" / name
    with np.load(out / "subjects.npz") as subjects, np.load(out / "observed.npz") as observed:
        return {k: subjects[k] for k in subjects.files}, {k: observed[k] for k in observed.files}


@pytest.mark.workflow
def test_check_explains_each_design_without_frequencies(study, capsys):
    assert main(["check", str(study / "study.yaml")]) == 0
    out = capsys.readouterr().out
    assert "interaction: weighted, interaction: (a-hi - a-lo) - (b-hi - b-lo), 9 subjects" in out
    assert "group-by-load: two-sample, group x condition interaction: early minus late on a-hi minus a-lo" in out
    assert "three-groups: between-groups, group differences (F over groups early, middle, late) on a-hi" in out
    assert "age-effect: regression: (a-hi - a-lo) voltage ~ age + sex, testing age, 9 subjects, df 6" in out
    assert "dims=['channel', 'time']" in out and "Hz" not in out


@pytest.mark.workflow
def test_each_design_on_channel_by_time_maps_follows_the_library(study):
    import statsmodels.api as sm

    subjects, observed = _load(study, "interaction")
    assert observed["stat"].shape == (len(TINY_CHANNELS), 1, 41) and observed["freqs"].tolist() == [0.0]
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
    subjects, observed = _load(study, "age-effect")
    x = subjects["x"].astype(np.float64)
    # statsmodels.api.OLS of the a-hi - a-lo voltage on age and the sex indicator, at several points
    design = sm.add_constant(np.column_stack([AGES, [float(s == "M") for s in SEXES]]))
    for point in (0, 100, 200, 327):
        fit = sm.OLS(x[:, point], design).fit()
        assert observed["stat"].reshape(-1)[point] == pytest.approx(fit.tvalues[1], rel=1e-4)


@pytest.mark.workflow
def test_report_and_methods_state_each_design_without_frequencies(study):
    out = study / "results"
    methods = (out / "report" / "methods.md").read_text()
    assert "Hz" not in methods and "Points are channel × time" in methods
    assert "tested against zero at each point with a one-sample t test" in methods
    assert "group early was compared with group late" in methods
    assert "one-way between-subject F test (df 2 and 6; Fisher 1925)" in methods
    assert "regression: (a-hi - a-lo) voltage ~ age + sex" in methods
    assert "an intercept and sex as nuisance covariate" in methods
    html = (out / "report" / "index.html").read_text()
    # what the reader sees: the page without its scripts (the explorer's shared script also draws time-frequency maps)
    shown = re.sub(r"<script.*?</script>", "", html, flags=re.S)
    assert "frequenc" not in shown.lower().replace("time-frequency decomposition was computed", "")
    for heading in (
        "weighted, interaction: (a-hi - a-lo) - (b-hi - b-lo), t statistic",
        "two-sample, group x condition interaction: early minus late on a-hi minus a-lo, t statistic",
        "between-groups, group differences (F over groups early, middle, late) on a-hi, F statistic",
        "regression, (a-hi - a-lo) ~ age + sex, testing age, t statistic",
    ):
        assert heading in html
    assert (
        "F statistic, greater, n = 9; 328 points (8 channels × 41 times). Larger values mean larger differences" in html
    )
    assert "columns are the conditions and the tested contrast. Every value is in interaction/cluster/" in html
    assert "columns are the condition, per group. Every value is in three-groups/cluster/" in html
    for name in ("interaction", "group-by-load", "three-groups", "age-effect"):
        header = (out / "contrasts" / name / "cluster" / "clusters.tsv").read_text().splitlines()[0]
        assert "time_start_ms" in header and "freq" not in header
    figures = {p.name for p in (out / "report" / "figures").iterdir()}
    for name in ("interaction", "three-groups"):  # the two with a significant cluster
        assert {f"{name}__cluster__cluster-pos1.png", f"{name}__cluster__values.png"} <= figures
    values = (out / "contrasts" / "interaction" / "cluster" / "subject_values.tsv").read_text().splitlines()
    assert all(f"\t{c}" in values[0] for c in CONDITIONS) and len(values) == 10
