"""Voltage contrasts in the report: the explorer's data and page, and the chosen time-course channels."""

from pathlib import Path

import matplotlib
import numpy as np
import pytest

import famwise.cli
from famwise.cli import main
from famwise.errors import UserError
from famwise.report.explorer import STAT_STEPS, explorer_block, explorer_data, unpack
from famwise.report.point_words import side_by_side_words
from famwise.report.results import ReportedContrast, ReportedCorrection
from famwise.report.voltage_figures import voltage_map_figure
from famwise.spec import load_study

from conftest import TINY_CHANNELS, write_tiny_study

matplotlib.use("Agg")

TIMES = np.round(np.arange(0.0, 0.2001, 0.02), 3)


def _contrast() -> ReportedContrast:
    """A (C, 1, T) voltage contrast with one positive cluster over Cz and Pz at 60 to 120 ms (invented values)."""
    rng = np.random.default_rng(4)
    shape = (len(TINY_CHANNELS), 1, TIMES.size)
    stat = rng.normal(size=shape)
    members = [TINY_CHANNELS.index("Cz"), TINY_CHANNELS.index("Pz")]
    stat[members, 0, 3:7] += 6.0
    stat[TINY_CHANNELS.index("Pz"), 0, 5] = 9.0  # the peak
    ids = np.zeros(shape, dtype=np.int32)
    ids[members, 0, 3:7] = 1
    row = {
        "id": 1,
        "sign": "+",
        "statistic": float(stat[ids == 1].sum()),
        "p": 0.01,
        "n_points": int((ids == 1).sum()),
        "channels": "Cz,Pz",
        "time_start_ms": 60.0,
        "time_end_ms": 120.0,
        "peak_stat": 9.0,
        "peak_channel": "Pz",
        "peak_time_ms": 100.0,
    }
    cluster = ReportedCorrection(
        name="cluster",
        method="cluster",
        p_corrected=np.where(ids == 1, 0.01, 1.0),
        mask=ids == 1,
        threshold=np.nan,
        threshold_kind="cluster",
        settings={},
        n_significant=int((ids == 1).sum()),
        cluster_id=ids,
        clusters=[row],
    )
    return ReportedContrast(
        name="late-positive",
        stat=stat,
        p=np.full(shape, 0.5),
        effect=stat * 0.8,
        effect_size=stat / 3,
        df=np.array(9.0),
        channels=list(TINY_CHANNELS),
        freqs=np.array([0.0]),
        times=TIMES,
        test="paired",
        statistic="t",
        tail="two-sided",
        n=10,
        nulls={},
        corrections=[cluster],
    )


def _data(tmp_path: Path, start=None) -> dict:
    flat = np.random.default_rng(1).uniform(-0.8, 0.8, size=(len(TINY_CHANNELS), 2))
    return explorer_data(
        _contrast(),
        tmp_path,
        flat=flat,
        alpha=0.05,
        stat_label="t",
        unit="µV",
        positive="high above low",
        negative="high below low",
        start=start,
    )


def test_voltage_explorer_data_has_no_frequency_and_keeps_the_point_order(tmp_path):
    contrast = _contrast()
    data = _data(tmp_path)
    assert data["voltage"] is True and data["freqs"] == [] and data["shape"] == [len(TINY_CHANNELS), 1, TIMES.size]
    assert data["times"] == [round(t * 1000, 3) for t in TIMES]
    # the packed statistic is in (channel, time) order: the voltage map's single frequency entry adds no axis
    steps = unpack(data["stat"], "<i2", contrast.stat.size).reshape(len(TINY_CHANNELS), TIMES.size)
    np.testing.assert_allclose(steps / STAT_STEPS * data["limit"], contrast.stat[:, 0], atol=data["limit"] / STAT_STEPS)
    ids = unpack(data["corrections"][0]["ids"], "<i2", contrast.stat.size).reshape(len(TINY_CHANNELS), TIMES.size)
    assert np.array_equal(ids, contrast.corrections[0].cluster_id[:, 0])
    (row,) = data["corrections"][0]["clusters"]
    assert row["channels"] == "Cz,Pz" and not any("freq" in key for key in row)
    assert data["start"] == []  # the page starts at the peak channel


def test_voltage_explorer_page_shows_a_time_course_and_no_frequency(tmp_path):
    page = explorer_block(_data(tmp_path, start=["Pz", "Cz"]))
    assert 'class="xp-course"' in page and 'class="xp-tf"' in page
    text = page[: page.index('<script type="application/json"')]
    assert "frequenc" not in text.lower() and "Hz" not in text
    assert "channels and a time window" in text  # the caveat names no frequency band
    assert '"start":[6,3]' in page  # Pz, Cz as indices of the channel list


def test_time_frequency_explorer_page_keeps_its_map():
    data = {"contrast": "attention", "corrections": [], "voltage": False}
    page = explorer_block(data)
    assert 'class="xp-course"' not in page and "over time and frequency" in page


def _course_line(figure):
    """x (ms) and y of the time course drawn in the figure's top panel (the longest line)."""
    lines = [line for line in figure.axes[0].get_lines() if len(line.get_xdata()) > 2]
    return np.asarray(lines[0].get_xdata()), np.asarray(lines[0].get_ydata())


def _bars(figure):
    """(start, end) in ms of the span bars under the top panel's axis."""
    return [tuple(np.round(line.get_xdata(), 6)) for line in figure.axes[0].get_lines() if len(line.get_xdata()) == 2][
        1:
    ]  # the first two-point line is the zero line


def test_time_course_at_the_peak_by_default_and_the_mean_of_chosen_channels():
    contrast = _contrast()
    mask = contrast.corrections[0].mask.copy()
    mask[TINY_CHANNELS.index("Oz"), 0, 9] = True  # significant at Oz only
    peak = voltage_map_figure(contrast, mask, title="cluster", subtitle="")
    x, y = _course_line(peak)
    np.testing.assert_array_equal(x, TIMES * 1000)
    np.testing.assert_array_equal(y, contrast.stat[TINY_CHANNELS.index("Pz"), 0])
    assert "Pz (peak channel)" in peak.axes[0].get_title()
    assert _bars(peak) == [(50.0, 130.0)]  # 60 to 120 ms, half a step beyond each end

    chosen = voltage_map_figure(contrast, mask, title="cluster", subtitle="", course=["Oz", "Cz"])
    x, y = _course_line(chosen)
    rows = [TINY_CHANNELS.index("Oz"), TINY_CHANNELS.index("Cz")]
    np.testing.assert_allclose(y, contrast.stat[rows, 0].mean(axis=0), rtol=0, atol=1e-12)  # numpy mean
    assert "mean over Oz, Cz" in chosen.axes[0].get_title()
    assert _bars(chosen) == [(50.0, 130.0), (170.0, 190.0)]  # significant at either channel
    single = voltage_map_figure(contrast, mask, title="cluster", subtitle="", course=["Oz"])
    assert "Oz (chosen channel)" in single.axes[0].get_title()
    assert _bars(single) == [(170.0, 190.0)]
    words = side_by_side_words(contrast, ["Oz", "Cz"])
    assert "averaged over Oz, Cz (report.time_course_channels)" in words and "at any of them" in words
    with pytest.raises(UserError, match="report.time_course_channels: P9 not among"):
        voltage_map_figure(contrast, mask, title="cluster", subtitle="", course=["P9"])


SPEC = """\
version: 1
name: chosen channels
subjects:
  source: epochs
  path: data/sub-{subject}.npz
conditions:
  high: [high]
  low: [low]
decomposition:
  method: none
analysis:
  channels: [Pz, Cz, Fz]
contrasts:
  - name: load
    test: paired
    conditions: [high, low]
inference:
  corrections:
    - method: holm
report:
  time_course_channels: [Pz, Cz]
"""


def _load_error(tmp_path: Path, text: str) -> str:
    spec = tmp_path / "study.yaml"
    spec.write_text(text)
    with pytest.raises(UserError) as caught:
        load_study(spec)
    return str(caught.value)


def test_time_course_channels_load_and_reach_the_report_record(tmp_path):
    spec = tmp_path / "study.yaml"
    spec.write_text(SPEC)
    study = load_study(spec).study
    assert study.report.time_course_channels == ["Pz", "Cz"]
    assert study.model_dump(mode="json")["report"] == {"time_course_channels": ["Pz", "Cz"]}


@pytest.mark.parametrize(
    ("edit", "fragment"),
    [
        (("[Pz, Cz]\n", "[Pz, P4]\n"), "study.yaml:21 report.time_course_channels[1]: 'P4' is not an analysed channel"),
        (("[Pz, Cz]\n", "[Pz, Pz]\n"), "study.yaml:21 report.time_course_channels: a channel is listed twice"),
        (("[Pz, Cz]\n", "[]\n"), "study.yaml:21 report.time_course_channels"),
        (("  method: none\n", "  method: morlet\n"), "report.time_course_channels: only used by voltage studies"),
    ],
)
def test_time_course_channels_mistakes_name_file_line_and_key(tmp_path, edit, fragment):
    message = _load_error(tmp_path, SPEC.replace(*edit))
    assert fragment in message, message


TIME_FREQUENCY = """\
decomposition:
  frequencies: {lowest_hz: 6, highest_hz: 14, count: 3, spacing: linear}
  cycles: 3
  time_step_ms: 50
  baseline: {mode: db, window_ms: [-400, -200]}
"""
"""The tiny study's own decomposition section (conftest.write_tiny_study)."""


def _no_snakemake(*args, **kwargs):
    raise AssertionError("Snakemake was started for a spec that is broken")


def _tiny_voltage_study(folder: Path, channels: str) -> Path:
    """The tiny epochs study as a voltage study whose report section names ``channels``."""
    write_tiny_study(folder, n_subjects=4)
    spec = folder / "study.yaml"
    text = spec.read_text()
    assert TIME_FREQUENCY in text
    text = text.replace(TIME_FREQUENCY, "decomposition:\n  method: none\n")
    spec.write_text(text + f"report:\n  time_course_channels: {channels}\n")
    return spec


def test_check_finds_time_course_channels_missing_from_the_data(tmp_path, capsys, monkeypatch):
    spec = _tiny_voltage_study(tmp_path, "[Pz, P9]")
    line = spec.read_text().splitlines().index("  time_course_channels: [Pz, P9]") + 1
    monkeypatch.setattr(famwise.cli, "run_snakemake", _no_snakemake)
    assert main(["check", str(spec)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert f"study.yaml:{line} report.time_course_channels[1]: 'P9' is not an analysed channel" in err[0]
    assert "Traceback" not in err[0]


def test_check_accepts_time_course_channels_of_the_data(tmp_path, capsys):
    spec = _tiny_voltage_study(tmp_path, "[Pz, Cz]")
    assert main(["check", str(spec)]) == 0
