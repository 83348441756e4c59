"""A tiny voltage study (decomposition.method 'none') run end to end: maps, t, clusters, report without frequency."""

import json

import numpy as np
import pytest
import scipy.signal
import scipy.stats

import famwise.io
from famwise.cli import main

from conftest import TINY_CHANNELS

SAMPLE_RATE_HZ = 100.0
SPEC = """\
version: 1
name: tiny voltage study
seed: 3
subjects:
  source: epochs
  path: data/sub-{subject}.npz
  min_epochs: 5
conditions:
  high: [high]
  low: [low]
decomposition:
  method: none
  time_step_ms: 20
  lowpass_hz: 20
  baseline: {window_ms: [-200, 0]}
analysis:
  time_ms: [0, 800]
channels:
  positions: 10-10
contrasts:
  - name: late-positive
    test: paired
    conditions: [high, low]
inference:
  permutations: 63
  shards: 2
  corrections:
    - method: max-stat
    - method: cluster
      forming_p: 0.05
    - method: tfce
planned_regions:
  - {name: parietal-late, channels: [Pz, Cz], time_ms: [300, 700]}
"""


def write_voltage_study(folder, n_subjects: int = 6):
    """Epochs with a late positive wave (peak 500 ms) over Pz and Cz, larger in 'high'. Invented data."""
    rng = np.random.default_rng(11)
    (folder / "data").mkdir(parents=True, exist_ok=True)
    times = np.arange(-0.4, 1.0, 1 / SAMPLE_RATE_HZ)
    wave = np.exp(-0.5 * ((times - 0.5) / 0.1) ** 2)
    for number in range(1, n_subjects + 1):
        labels = ["high"] * 10 + ["low"] * 10
        data = rng.normal(scale=4e-6, size=(20, len(TINY_CHANNELS), times.size))
        for epoch, label in enumerate(labels):
            for name, weight in (("Pz", 1.0), ("Cz", 0.7)):
                data[epoch, TINY_CHANNELS.index(name)] += weight * (6e-6 if label == "high" else 1e-6) * wave
        famwise.io.save_epochs(
            folder / "data" / f"sub-{number:02d}.npz",
            data,
            sample_rate_hz=SAMPLE_RATE_HZ,
            epoch_start_s=float(times[0]),
            channels=TINY_CHANNELS,
            event_labels=labels,
        )
    (folder / "study.yaml").write_text(SPEC)
    return folder / "study.yaml"


@pytest.fixture(scope="module")
def voltage_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("voltage")
    spec = write_voltage_study(folder)
    assert main(["run", str(spec), "--cores", "2"]) == 0
    return folder


def _reference_maps(path):
    """Low-pass (scipy.signal.sosfiltfilt), decimation (scipy.signal.decimate), condition mean, baseline, in µV."""
    with np.load(path) as npz:
        data, labels, epoch_start_s = npz["data"], npz["event_labels"], float(npz["epoch_start_s"])
    sos = scipy.signal.butter(4, 20.0, btype="low", fs=SAMPLE_RATE_HZ, output="sos")
    filtered = scipy.signal.sosfiltfilt(sos, data, axis=-1)
    zero = int(round(-epoch_start_s * SAMPLE_RATE_HZ))
    decimated = scipy.signal.decimate(filtered[..., zero % 2 :], 2, ftype="fir", zero_phase=True, axis=-1) * 1e6
    times = epoch_start_s + (zero % 2 + 2 * np.arange(decimated.shape[-1])) / SAMPLE_RATE_HZ
    base = (times >= -0.2 - 1e-9) & (times <= 1e-9)
    out = []
    for label in ("high", "low"):
        mean = decimated[labels == label].mean(axis=0)
        out.append(mean - mean[:, base].mean(axis=1, keepdims=True))
    return np.array(out), times


@pytest.mark.workflow
def test_voltage_t_equals_ttest_rel(voltage_run):
    # source: scipy.signal.sosfiltfilt/decimate per epoch, numpy means, scipy.stats.ttest_rel over subjects
    refs = [_reference_maps(voltage_run / "data" / f"sub-{n:02d}.npz") for n in range(1, 7)]
    maps = np.array([r[0] for r in refs])
    times = refs[0][1]
    window = (times >= -1e-9) & (times <= 0.8 + 1e-9)
    expected = scipy.stats.ttest_rel(maps[:, 0][..., window], maps[:, 1][..., window], axis=0).statistic
    with np.load(voltage_run / "results" / "contrasts" / "late-positive" / "observed.npz") as obs:
        assert obs["stat"].shape == (len(TINY_CHANNELS), 1, window.sum())
        np.testing.assert_allclose(obs["stat"][:, 0], expected, rtol=2e-4, atol=2e-4)
        assert obs["freqs"].tolist() == [0.0]
    with np.load(voltage_run / "results" / "tf" / "sub-01.npz") as tf:
        np.testing.assert_allclose(tf["values"][:, :, 0], maps[0], atol=1e-4)


@pytest.mark.workflow
def test_voltage_clusters_and_report_show_no_frequency(voltage_run):
    result = voltage_run / "results" / "contrasts" / "late-positive"
    table = (result / "cluster" / "clusters.tsv").read_text().splitlines()
    header = table[0].split("\t")
    assert not any("freq" in column for column in header)
    assert len(table) > 1 and "Pz" in table[1]
    sidecar = json.loads((result / "cluster" / "clusters.json").read_text())
    assert not any("freq" in key for key in sidecar)
    html = (voltage_run / "results" / "report" / "index.html").read_text()
    methods = (voltage_run / "results" / "report" / "methods.md").read_text()
    assert "Hz" not in methods.replace("20 Hz", "").replace("100 Hz", "").replace("50 Hz", "")
    assert "low-pass" in methods and "decimat" in methods
    assert "'freq'" not in methods and "dims = ['channel', 'time']" in methods
    # the spec's text and the decomposition summary name the low-pass cut-off; nothing else names a frequency
    assert "frequenc" not in html.lower().replace("time-frequency decomposition was computed", "")
    assert html.count(" Hz") == methods.count(" Hz") + 1
    figures = sorted(p.name for p in (voltage_run / "results" / "report" / "figures").iterdir())
    assert any("cluster-pos1" in name for name in figures)


@pytest.mark.workflow
def test_example_voltage_study_finds_the_late_positive_wave(tmp_path):
    # the demo's BIDS data through voltage.yaml: the injected parietal wave (peak 600 ms, larger for high load)
    from famwise.demo import write_demo

    write_demo(tmp_path)
    spec = tmp_path / "voltage.yaml"
    assert main(["run", str(spec), "--cores", "2"]) == 0
    result = tmp_path / "results-voltage" / "contrasts" / "late-positive-load"
    rows = [line.split("\t") for line in (result / "cluster" / "clusters.tsv").read_text().splitlines()]
    table = [dict(zip(rows[0], row)) for row in rows[1:]]
    first = table[0]
    assert first["sign"] == "positive" and float(first["p"]) <= 0.05
    assert "Pz" in first["channels"].split(",") and float(first["time_start_ms"]) <= 600 <= float(first["time_end_ms"])
    assert first["peak_channel"] in {"Pz", "P3", "P4", "PO3", "PO4"}
    with np.load(result / "observed.npz") as observed:
        assert observed["stat"].shape == (32, 1, 61)


def test_check_describes_a_voltage_study_without_frequencies(tmp_path):
    from famwise.plan import Plan
    from famwise.summary import describe_plan

    spec = write_voltage_study(tmp_path, n_subjects=3)
    text = describe_plan(Plan.from_spec(spec))
    line = next(line for line in text.splitlines() if line.startswith("Decomposition:"))
    assert line == (
        "Decomposition: none, condition mean voltage (µV, points channel x time), zero-phase low-pass 20 Hz, "
        "time step 20 ms by anti-aliasing decimation, baseline subtract [-200.0, 0.0] ms"
    )
    region = next(line for line in text.splitlines() if line.startswith("Analysis region:"))
    assert "frequency" not in region and "the epoch's end" not in region
    cluster = next(line for line in text.splitlines() if line.startswith("  - cluster: cluster"))
    assert "dims=['channel', 'time']" in cluster


@pytest.mark.workflow
def test_calibration_runs_on_voltage_maps(voltage_run):
    # famwise calibrate on the voltage study: null datasets from the subjects' own channel x time maps
    assert main(["calibrate", str(voltage_run / "study.yaml"), "--datasets", "8", "--shards", "1", "--cores", "2"]) == 0
    rows = (voltage_run / "results" / "calibration" / "late-positive.tsv").read_text().splitlines()
    corrections = [row.split("\t")[0] for row in rows[1:]]
    assert corrections == ["uncorrected", "max-stat", "cluster", "tfce"]
    assert all(row.split("\t")[2] == "8" for row in rows[1:])
