"""Preflight on BIDS input: headers and events only, fast enough for a large study."""

import time

import numpy as np
import pytest

from famwise import bids, bids_writing
from famwise.errors import UserError
from famwise.plan import Plan
from famwise.preflight import preflight, read_headers

CHANNELS = ["Fz", "Cz", "Pz", "Oz"]
SPEC = """\
version: 1
name: many subjects
subjects:
  source: bids
  path: data
  task: lantern
  min_epochs: 5
conditions:
  high-load: [high]
  low-load: [low]
epochs:
  window_ms: [-800, 1600]
decomposition:
  frequencies: {lowest_hz: 6, highest_hz: 30, count: 4}
  cycles: 3
  baseline: {mode: db, window_ms: [-500, -200]}
contrasts:
  - name: load
    test: paired
    conditions: [high-load, low-load]
inference:
  corrections:
    - method: holm
"""


def write_bids_study(folder, n_subjects: int, *, seconds: float = 40.0):
    """Invented recordings: noise, 10 events of each label 3 s apart."""
    rng = np.random.default_rng(3)
    sample_rate_hz = 100.0
    for number in range(1, n_subjects + 1):
        data = rng.normal(scale=5e-6, size=(len(CHANNELS), int(seconds * sample_rate_hz)))
        events = [(2.0 + 1.8 * k, 0.0, "high" if k % 2 else "low") for k in range(20)]
        bids_writing.write_subject(
            folder / "data",
            f"{number:02d}",
            data=data,
            sample_rate_hz=sample_rate_hz,
            channels=CHANNELS,
            events=events,
            task="lantern",
        )
    spec = folder / "study.yaml"
    spec.write_text(SPEC)
    return spec


def test_sixty_subjects_are_checked_in_under_ten_seconds(tmp_path):
    spec = write_bids_study(tmp_path, 60)
    started = time.perf_counter()
    plan = Plan.from_spec(spec)
    preflight(plan)
    elapsed = time.perf_counter() - started
    headers = read_headers(plan)
    assert len(headers) == 60 and headers["60"].channels == CHANNELS and headers["60"].sample_rate_hz == 100.0
    assert headers["01"].labels == {"high": 10, "low": 10}
    assert elapsed < 10.0, elapsed


def test_bids_label_in_no_recording(tmp_path):
    spec = write_bids_study(tmp_path, 3)
    spec.write_text(SPEC.replace("low-load: [low]", "low-load: [lowww]"))
    with pytest.raises(
        UserError,
        match=r"study.yaml:10 conditions.low-load: .*'lowww' \(labels found: high, low\) \(did you mean 'low'\?\)",
    ):
        preflight(Plan.from_spec(spec))


def test_bids_epoch_window_beyond_the_recording(tmp_path):
    spec = write_bids_study(tmp_path, 3)
    spec.write_text(SPEC.replace("window_ms: [-800, 1600]", "window_ms: [-2500, 1600]"))
    with pytest.raises(
        UserError, match=r"study.yaml:12 epochs.window_ms: subject 01: the epoch window around the event at onset 2 s"
    ):
        preflight(Plan.from_spec(spec))


def test_bids_header_agrees_with_the_reader(tmp_path):
    spec = write_bids_study(tmp_path, 2)
    plan = Plan.from_spec(spec)
    header = read_headers(plan)["01"]
    epochs = bids.read_subject(
        tmp_path / "data",
        "01",
        task="lantern",
        window_ms=(-800, 1600),
        reject_peak_to_peak_uv=None,
        reference="none",
        labels={"high", "low"},
    )
    assert header.n_samples == epochs.data.shape[-1] and header.epoch_start_s == pytest.approx(epochs.epoch_start_s)
    assert header.channels == list(epochs.channels) and header.sample_rate_hz == epochs.sample_rate_hz
