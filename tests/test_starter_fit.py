"""`famwise init` writes time-frequency settings that fit the data it found: `check` raises no warning."""

import numpy as np
import pytest
from test_preflight_bids import write_bids_study

import famwise.io
from famwise.cli import main
from famwise.plan import Plan
from famwise.preflight import preflight
from famwise.preflight.starter_fit import edge_halfwidth_ms, starter_timing

from conftest import write_tiny_subject


def _init(folder):
    assert main(["init", str(folder / "data"), "--out", str(folder / "study.yaml")]) == 0
    return Plan.from_spec(folder / "study.yaml")


@pytest.mark.parametrize(("sample_rate_hz", "start_s"), [(100.0, -0.6), (256.0, -0.6), (500.0, -0.45)])
def test_init_on_epochs_files_gives_a_baseline_free_of_edge_effects(tmp_path, sample_rate_hz, start_s):
    rng = np.random.default_rng(0)
    (tmp_path / "data").mkdir()
    for subject in ("01", "02", "03"):
        write_tiny_subject(tmp_path / "data" / f"sub-{subject}.npz", rng, sample_rate_hz=sample_rate_hz)
    plan = _init(tmp_path)
    if start_s != -0.6:  # write_tiny_subject starts at -0.6 s; cut the pre-event part shorter
        for path in (tmp_path / "data").glob("*.npz"):
            with np.load(path) as archive:
                arrays = {k: archive[k] for k in archive.files}
            skip = int(round((start_s + 0.6) * sample_rate_hz))
            famwise.io.save_epochs(
                path,
                arrays["data"][..., skip:],
                sample_rate_hz=sample_rate_hz,
                epoch_start_s=float(arrays["epoch_start_s"]) + skip / sample_rate_hz,
                channels=list(arrays["channels"]),
                event_labels=list(arrays["event_labels"]),
            )
        (tmp_path / "study.yaml").unlink()
        plan = _init(tmp_path)
    assert preflight(plan) == []
    low = plan.study.decomposition.baseline.window_ms[0]
    # edge-free from the epoch start plus the widest cone half-width (sqrt(2) sigma_t; Torrence & Compo 1998)
    assert low >= start_s * 1000 + edge_halfwidth_ms(plan.study.decomposition.frequencies.highest_hz)


def test_init_on_bids_chooses_an_epoch_long_enough_for_the_baseline(tmp_path):
    write_bids_study(tmp_path, 3)
    (tmp_path / "study.yaml").unlink()
    plan = _init(tmp_path)
    assert preflight(plan) == []
    start = plan.study.epochs.window_ms[0]
    assert start <= -400 - edge_halfwidth_ms(40.0)
    assert tuple(plan.study.decomposition.baseline.window_ms) == (-400, -100)


def test_starter_timing_keeps_frequencies_below_nyquist_and_steps_on_samples():
    timing = starter_timing(64.0, (-1000.0, 1000.0))
    assert timing["highest_hz"] < 32.0
    assert timing["time_step_ms"] * 64.0 / 1000.0 == pytest.approx(round(timing["time_step_ms"] * 64.0 / 1000.0))
    assert starter_timing(250.0, (-100.0, 1000.0))["baseline_ms"] is None
