"""The report and methods text with points left out of the family, and the analysis window sentence."""

import json

import numpy as np

from famwise.report import build_report, methods_text

from report_fixture import write_output


def _leave_out_a_channel(output, channel=0):
    path = output / "contrasts" / "attention" / "observed.npz"
    with np.load(path) as archive:
        arrays = {key: archive[key] for key in archive.files}
    left_out = np.zeros(arrays["stat"].shape, bool)
    left_out[channel, 2:4, 10:20] = True
    arrays["left_out"] = left_out
    arrays["stat"] = np.where(left_out, 0.0, arrays["stat"])
    arrays["p"] = np.where(left_out, np.nan, arrays["p"])
    np.savez(path, **arrays)
    return left_out, arrays


def test_left_out_points_are_listed_hatched_and_stated_in_the_methods(tmp_path):
    spec = tmp_path / "study.yaml"
    spec.write_text("version: 1\nname: attention alpha\n")
    output = tmp_path / "results"
    write_output(output)
    left_out, arrays = _leave_out_a_channel(output)
    index = build_report(
        output, spec_text=spec.read_text(), spec_path=spec, input_files=[], started="2026-01-01T00:00:00+00:00"
    )
    html = index.read_text(encoding="utf-8")
    channel = str(arrays["channels"][0])
    freqs, times = arrays["freqs"], arrays["times"]
    where = f"{channel}; {freqs[2]:g}-{freqs[3]:g} Hz; {times[10] * 1e3:.0f}-{times[19] * 1e3:.0f} ms"
    assert f"20 of {left_out.size} points were left out of the family" in html
    assert where in html
    assert "hatched: points left out" in html or "hatched in the figures" in html
    text = methods_text(json.loads((output / "study.json").read_text()), output)
    assert "were left out of the family (20 in attention)" in text


def test_methods_state_the_default_window_and_a_window_before_the_event(tmp_path):
    output = tmp_path / "results"
    study = write_output(output)
    given = methods_text(study, output)
    assert "-200 to 600 ms (chosen to include time before the event)" in given
    study["analysis"]["time_ms"] = None
    default = methods_text(study, output)
    assert "the window from the event (0 ms) to 600 ms, where the data free of edge effects end" in default
    assert "pre-event baseline was not tested" in default


def test_explorer_leaves_the_left_out_points_blank(tmp_path):
    from famwise.report.explorer import explorer_data, unpack
    from famwise.report.results import read_run

    output = tmp_path / "results"
    write_output(output)
    left_out, _ = _leave_out_a_channel(output)
    contrast = read_run(output).contrasts[0]
    data = explorer_data(
        contrast,
        output / "contrasts" / "attention",
        flat=np.zeros((len(contrast.channels), 2)),
        alpha=0.05,
        stat_label="t",
        unit="dB",
        positive="more",
        negative="less",
    )
    steps = unpack(data["stat"], "<i2", left_out.size).reshape(left_out.shape)
    assert np.all(steps[left_out] == -32768) and np.all(steps[~left_out] != -32768)
