"""Scheduler resources (memory, runtime) estimated from a study's sizes."""

import subprocess
import sys

import numpy as np
import yaml

from famwise import bids_writing
from famwise import scheduler_sizing as sizing
from famwise.plan import Plan
from famwise.settings_codec import to_json

from conftest import write_tiny_study, write_tiny_subject


def _plan_with(spec, **inference) -> Plan:
    """The spec's plan with some ``inference`` settings changed."""
    study = yaml.safe_load(spec.read_text())
    study["inference"].update(inference)
    spec.write_text(yaml.safe_dump(study, sort_keys=False))
    return Plan.from_spec(spec)


def test_sizes_of_an_epochs_study(tiny_study):
    plan = Plan.from_spec(tiny_study)
    sizes = sizing.study_sizes(plan)
    # The tiny study (conftest): 6 subjects, 8 channels, 3 frequencies, epochs of 160
    # samples at 100 Hz = 1590 ms, 50 ms steps -> 32 map times; 63 permutations in 2 shards.
    assert (sizes.n_subjects, sizes.n_channels, sizes.n_freqs, sizes.n_map_times) == (6, 8, 3, 32)
    assert sizes.n_times == 32 and sizes.n_points == 8 * 3 * 32
    assert (sizes.n_conditions, sizes.n_contrasts, sizes.permutations, sizes.rows_per_shard) == (2, 1, 63, 32)
    assert sizing.study_sizes(plan) is sizes

    rec = sizing.recording_sizes(plan, "01")
    path = tiny_study.parent / "data" / "sub-01.npz"
    assert rec == sizing.RecordingSizes(path.stat().st_size, 8, 24, 160, 100.0)


def test_recording_sizes_from_bids_headers_and_events(tmp_path):
    rng = np.random.default_rng(0)
    events = [(2.0 + 3 * k, 0.0, ["low", "high", "boundary"][k % 3]) for k in range(30)]
    bids_writing.write_subject(
        tmp_path / "data",
        "01",
        data=rng.normal(scale=1e-5, size=(4, 250 * 100)),
        sample_rate_hz=250.0,
        channels=["Fz", "Cz", "Pz", "Oz"],
        events=events,
        task="mem",
    )
    spec = tmp_path / "study.yaml"
    spec.write_text(
        "version: 1\nname: b\nsubjects: {source: bids, path: data, task: mem}\n"
        "conditions: {high: [high], low: [low]}\nepochs: {window_ms: [-800, 1600]}\n"
        "decomposition: {cycles: 3, frequencies: {lowest_hz: 4, highest_hz: 30, count: 5}}\n"
        "channels: {positions: 10-10}\n"
        "contrasts: [{name: c, test: paired, conditions: [high, low]}]\n"
        "inference: {corrections: [{method: holm}]}\n"
    )
    plan = Plan.from_spec(spec)
    rec = sizing.recording_sizes(plan, "01")
    # 20 of the 30 events are high or low; 2400 ms at 250 Hz = 600 intervals -> 601 samples.
    assert (rec.n_channels, rec.n_epochs, rec.n_samples, rec.sample_rate_hz) == (4, 20, 601, 250.0)
    assert rec.input_bytes == sum(p.stat().st_size for p in (tmp_path / "data" / "sub-01" / "eeg").iterdir())
    sizes = sizing.study_sizes(plan)
    # 20 ms default steps over the 2400 ms epoch: 121 times.
    assert (sizes.n_channels, sizes.n_freqs, sizes.n_map_times, sizes.n_times) == (4, 5, 121, 121)


def test_requests_are_rounded_and_at_least_the_minimum(tiny_study):
    plan = Plan.from_spec(tiny_study)
    memories = [
        sizing.decompose_mem_mb(plan, "01"),
        sizing.contrast_data_mem_mb(plan),
        sizing.observed_mem_mb(plan),
        sizing.null_shard_mem_mb(plan),
        sizing.correct_mem_mb(plan, "holm"),
        sizing.report_mem_mb(plan),
        sizing.small_mem_mb(plan),
    ]
    for mem in memories:
        assert mem % 100 == 0 and mem >= sizing.MEM_SAFETY * sizing.BASE_MEM_MB
    runtimes = [
        sizing.decompose_runtime_min(plan, "01"),
        sizing.group_runtime_min(plan),
        sizing.null_shard_runtime_min(plan),
        sizing.correct_runtime_min(plan, "max-stat"),
        sizing.report_runtime_min(plan),
        sizing.small_runtime_min(plan),
    ]
    assert runtimes == [sizing.MIN_RUNTIME_MIN] * 6


def test_shard_time_follows_rows_per_shard_and_memory_does_not(tiny_study):
    one = _plan_with(tiny_study, permutations=50_000_000, shards=1)
    ten = _plan_with(tiny_study, permutations=50_000_000, shards=10)
    assert sizing.null_shard_mem_mb(one) == sizing.null_shard_mem_mb(ten)
    long, short = sizing.null_shard_runtime_min(one), sizing.null_shard_runtime_min(ten)
    assert short > sizing.MIN_RUNTIME_MIN and abs(long / short - 10) < 0.2  # whole minutes


def test_decompose_memory_grows_with_epochs(tmp_path):
    small = write_tiny_study(tmp_path / "small")
    large = write_tiny_study(tmp_path / "large")
    rng = np.random.default_rng(1)
    write_tiny_subject(large.parent / "data" / "sub-01.npz", rng, n_per_condition=3000)
    rec = sizing.recording_sizes(Plan.from_spec(large), "01")
    assert rec.n_epochs == 6000
    assert (
        sizing.decompose_mem_mb(Plan.from_spec(large), "01")
        > sizing.decompose_mem_mb(Plan.from_spec(small), "01") + 100
    )
    assert sizing.decompose_mem_mb(Plan.from_spec(large), "02") == sizing.decompose_mem_mb(Plan.from_spec(small), "02")


def test_family_of_all_contrasts_needs_more_memory_per_correction(tiny_study):
    study = yaml.safe_load(tiny_study.read_text())
    study["contrasts"].append({"name": "high-alone", "test": "one-sample", "conditions": ["high"]})
    tiny_study.write_text(yaml.safe_dump(study, sort_keys=False))
    per_contrast = _plan_with(tiny_study, permutations=5_000_000)
    together = _plan_with(tiny_study, family="all-contrasts", permutations=5_000_000)
    assert sizing.correct_mem_mb(together, "max-stat") > sizing.correct_mem_mb(per_contrast, "max-stat")


def test_decompose_estimate_covers_the_measured_peak(tiny_study):
    # Measured: the job's peak resident memory (getrusage of a fresh parent's only child) stays under the request.
    plan = Plan.from_spec(tiny_study)
    out = tiny_study.parent / "tf-01.npz"
    job = [
        sys.executable,
        "-m",
        "famwise.jobs",
        "decompose",
        "--subject",
        "01",
        "--settings",
        to_json(plan.decompose_settings()),
        "--out",
        str(out),
    ]
    measure = "import resource, subprocess, sys; subprocess.run(sys.argv[1:], check=True, capture_output=True); print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)"
    plan.loaded.output.mkdir()  # jobs run in the output folder, as Snakemake runs them
    peak_kb = int(
        subprocess.run(
            [sys.executable, "-c", measure, *job], check=True, capture_output=True, text=True, cwd=plan.loaded.output
        ).stdout
    )
    assert out.is_file()
    assert 20 < peak_kb / 1024 < sizing.decompose_mem_mb(plan, "01")


def test_cluster_and_tfce_corrections_ask_more_than_point_corrections(tiny_study):
    # 8 x 3 x 32 points are too few to tell apart: widen the maps (40 frequencies, 1 ms steps).
    study = yaml.safe_load(tiny_study.read_text())
    study["inference"]["corrections"] += [{"method": "tfce"}]
    study["decomposition"]["frequencies"]["count"] = 40
    study["decomposition"]["time_step_ms"] = 1
    tiny_study.write_text(yaml.safe_dump(study, sort_keys=False))
    plan = Plan.from_spec(tiny_study)
    assert sizing.correct_mem_mb(plan, "tfce") > sizing.correct_mem_mb(plan, "holm")


def test_power_shard_resources_grow_with_sample_size_and_studies(tiny_study):
    """A power shard asks for more time with more participants, studies per shard or permutations."""
    from dataclasses import replace

    from famwise.power.settings import power_shard_settings, power_spec

    spec = tiny_study
    spec.write_text(spec.read_text() + "power: {sample_sizes: [10, 40], studies: 40, shards: 2}\n")
    plan = Plan.from_spec(spec)
    small, large = (power_shard_settings(plan, power_spec(plan), "high-vs-low", "pilot-x1", n) for n in (10, 40))
    minutes = sizing.power_shard_runtime_min
    assert minutes(plan, small) <= minutes(plan, large)
    many = replace(large, studies=4000, nulls=replace(large.nulls, permutations=9999))
    assert minutes(plan, many) > minutes(plan, large) >= sizing.MIN_RUNTIME_MIN
    assert sizing.power_shard_mem_mb(plan, small) <= sizing.power_shard_mem_mb(plan, large)


def test_calibrate_shard_time_follows_datasets_per_shard_and_permutations(tiny_study):
    """A calibration shard asks for more time with more datasets per shard or more permutations, not memory."""
    from dataclasses import replace

    from famwise.calibrate.settings import calibration_settings

    plan = Plan.from_spec(tiny_study)
    few = calibration_settings(plan, "high-vs-low", datasets=10, permutations=None, shards=10)
    minutes = sizing.calibrate_shard_runtime_min
    many = replace(few, datasets=10_000, nulls=replace(few.nulls, permutations=9999))
    assert minutes(plan, many) > minutes(plan, few) >= sizing.MIN_RUNTIME_MIN
    assert sizing.calibrate_shard_mem_mb(plan, many) == sizing.calibrate_shard_mem_mb(plan, few) > 0
