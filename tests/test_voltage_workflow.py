"""A tiny voltage study (decomposition.method 'none') run end to end: maps, t, clusters, report without frequency."""

import json
import re

import numpy as np
import pytest
import scipy.signal
import scipy.stats
from test_report_explorer import _click_at, _driver, _errors, _pixel

import famwise.io
from famwise.cli import main
from famwise.report.explorer import STAT_STEPS, colour_table

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
    page = (voltage_run / "results" / "report" / "index.html").read_text()
    # what the reader sees: the page without its scripts (the explorer's shared script draws time-frequency
    # contrasts too; its data names no frequency, checked below and in the browser test)
    html = re.sub(r"<script.*?</script>", "", page, flags=re.S)
    payload = re.search(r'<script type="application/json" class="xp-data">(.*?)</script>', page, re.S).group(1)
    assert json.loads(payload)["voltage"] is True and json.loads(payload)["freqs"] == []
    assert "freq_" not in payload and "Hz" not in payload
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


@pytest.mark.workflow
def test_voltage_explorer_in_a_real_browser(voltage_run):
    from selenium.webdriver.support.ui import Select, WebDriverWait

    result = voltage_run / "results"
    with np.load(result / "contrasts" / "late-positive" / "observed.npz") as observed:
        stat, times_ms = observed["stat"][:, 0], observed["times"] * 1000
    with np.load(result / "contrasts" / "late-positive" / "cluster" / "result.npz") as found:
        mask = found["mask"][:, 0]
    rows = [
        line.split("\t")
        for line in (result / "contrasts" / "late-positive" / "cluster" / "clusters.tsv").read_text().splitlines()
    ]
    first = dict(zip(rows[0], rows[1]))
    C, T = stat.shape
    browser = _driver()
    try:
        browser.get((result / "report" / "index.html").as_uri())
        root = browser.find_element("css selector", ".explorer")
        browser.execute_script("arguments[0].scrollIntoView()", root)
        WebDriverWait(browser, 20).until(lambda _: "xp-ready" in root.get_attribute("class"))
        peak_c, peak_t = np.unravel_index(np.argmax(np.abs(stat)), stat.shape)
        assert root.get_attribute("data-selected") == TINY_CHANNELS[peak_c]
        assert root.get_attribute("data-cursor") == f"{times_ms[peak_t]:.0f} ms"
        grid = root.find_element("css selector", ".xp-tf")
        course = root.find_element("css selector", ".xp-course")
        left, top, width, height = (float(grid.get_attribute(f"data-{k}")) for k in ("left", "top", "width", "height"))

        def cell(c, t):
            return left + (t + 0.5) * width / T, top + (c + 0.5) * height / C

        # a cell away from the cursor has the colour of its channel and time (rows: channels, first on top)
        t0 = 0 if peak_t else 1
        limit = float(np.nanmax(np.abs(stat)))
        index = round((np.round(stat[0, t0] / limit * STAT_STEPS) / STAT_STEPS + 1) / 2 * 63)
        expected = [int(colour_table()[index][k : k + 2], 16) for k in (1, 3, 5)]
        drawn = _pixel(browser, grid, *cell(0, t0))
        assert np.abs(np.array(drawn[:3]) - expected).max() <= 2, (drawn, expected)

        Select(root.find_element("css selector", ".xp-correction")).select_by_visible_text("cluster")
        cz, pz, fz = (TINY_CHANNELS.index(name) for name in ("Cz", "Pz", "Fz"))
        _click_at(browser, grid, *cell(fz, 2))
        assert root.get_attribute("data-selected") == "Fz"
        assert root.get_attribute("data-cursor") == f"{times_ms[2]:.0f} ms"
        _click_at(browser, grid, *cell(pz, 3), shift=True)
        assert root.get_attribute("data-selected") == "Fz,Pz"
        caption = root.find_element("css selector", ".xp-course-caption").text
        assert "mean over 2 channels (Fz, Pz)" in caption
        # the time course's bars: orange under times significant at Fz or Pz, blank elsewhere
        c_left, c_top, c_width, c_height = (
            float(course.get_attribute(f"data-{k}")) for k in ("left", "top", "width", "height")
        )
        significant = mask[[fz, pz]].any(axis=0)
        assert significant.any() and not significant.all()
        for t in (int(np.flatnonzero(significant)[0]), int(np.flatnonzero(~significant)[0])):
            colour = _pixel(browser, course, c_left + (t + 0.5) * c_width / T, c_top + c_height + 5)
            assert colour == [199, 119, 0, 255] if significant[t] else colour[3] == 0, (t, colour)

        rows_shown = root.find_elements("css selector", ".xp-clusters tr[data-id]")
        rows_shown[0].click()
        assert root.get_attribute("data-cluster") == first["id"]
        assert root.get_attribute("data-selected") == first["channels"]
        assert root.get_attribute("data-cursor") == f"{float(first['peak_time_ms']):.0f} ms"
        header = root.find_element("css selector", ".xp-clusters thead").text
        assert "time" in header and "frequency" not in header
        text = root.text
        assert "Hz" not in text and "frequenc" not in text.lower()
        assert _errors(browser) == []
    finally:
        browser.quit()
