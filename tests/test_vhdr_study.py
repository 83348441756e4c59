"""A study whose BIDS folder holds `.vhdr` recordings: init, check, a real run, errors, and the demo in both formats."""

import json
import subprocess
import sys

import numpy as np
import pytest

from famwise import bids_writing
from famwise.cli import main
from famwise.demo import write_demo

FS = 100.0
CHANNELS = ["Fz", "FC1", "FC2", "Cz", "C3", "C4", "Pz", "Oz", "HEOG"]
SPEC = """\
version: 1
name: tiny vhdr study
seed: 3
subjects: {source: bids, path: data, task: mem, min_epochs: 5}
conditions: {high: [high], low: [low]}
epochs: {window_ms: [-600, 1000]}
decomposition:
  frequencies: {lowest_hz: 6, highest_hz: 14, count: 3, spacing: linear}
  cycles: 3
  time_step_ms: 50
  baseline: {mode: db, window_ms: [-400, -200]}
channels: {positions: 10-10}
contrasts:
  - {name: high-vs-low, test: paired, conditions: [high, low]}
inference:
  permutations: 31
  shards: 1
  corrections: [{method: holm}, {method: max-stat}]
"""


def _famwise(*args) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "famwise.cli", *map(str, args)], capture_output=True, text=True)


def _write_study(folder, n_subjects=5):
    """Invented recordings: noise plus a 7 Hz burst on Fz/FC1/FC2, stronger after 'high' events; HEOG is an EOG channel."""
    rng = np.random.default_rng(5)
    for number in range(1, n_subjects + 1):
        onsets = 1.0 + 2.0 * np.arange(24)
        labels = ["high" if k % 2 else "low" for k in range(24)]
        times = np.arange(int((onsets[-1] + 2.0) * FS)) / FS
        data = rng.normal(scale=5e-6, size=(len(CHANNELS), times.size))
        for onset, label in zip(onsets, labels):
            envelope = np.exp(-0.5 * ((times - onset - 0.4) / 0.12) ** 2)
            burst = (
                (2.0 if label == "high" else 0.5)
                * 5e-6
                * envelope
                * np.cos(2 * np.pi * 7 * times + rng.uniform(0, 6.3))
            )
            data[:3] += burst
        subject = f"{number:02d}"
        bids_writing.write_subject(
            folder / "data",
            subject,
            data=data,
            sample_rate_hz=FS,
            channels=CHANNELS,
            task="mem",
            events=[(float(t), 0.0, lab) for t, lab in zip(onsets, labels)],
            fmt="vhdr",
        )
        channels = folder / "data" / f"sub-{subject}" / "eeg" / f"sub-{subject}_task-mem_channels.tsv"
        channels.write_text(channels.read_text().replace("HEOG\tEEG", "HEOG\tEOG"))
    bids_writing.write_participants(folder / "data", [{"participant_id": f"{n:02d}"} for n in range(1, n_subjects + 1)])
    spec = folder / "study.yaml"
    spec.write_text(SPEC)
    return spec


@pytest.mark.workflow
def test_init_check_and_run_a_vhdr_study(tmp_path):
    spec = _write_study(tmp_path)
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "starter.yaml")]) == 0
    starter = (tmp_path / "starter.yaml").read_text()
    assert "# recordings found: 5 vhdr/vmrk/eeg (.vhdr)" in starter and "task: mem" in starter
    assert 'high: ["high"]      # 60 epochs over all subjects' in starter

    vmrk = tmp_path / "data" / "sub-02" / "eeg" / "sub-02_task-mem_eeg.vmrk"
    vmrk.write_text(vmrk.read_text(encoding="utf-8").replace("Mk5=Stimulus", "Mk5=Comment"), encoding="utf-8")
    result = _famwise("check", spec)
    assert result.returncode == 0, result.stderr
    assert (
        "Channels left out by _channels.tsv (types other than EEG, and status bad):\n  - EOG: HEOG\n" in result.stdout
    )
    assert (
        f"famwise: warning: subject 02: {vmrk} holds 23 stimulus markers but "
        f"{vmrk.with_name('sub-02_task-mem_events.tsv')} lists 24 events"
    ) in result.stderr

    assert main(["run", str(spec), "--cores", "2"]) == 0
    subjects = (tmp_path / "results" / "subjects.tsv").read_text().splitlines()
    assert len(subjects) == 6 and all("\tincluded\t" in line for line in subjects[1:])
    with np.load(tmp_path / "results" / "tf" / "sub-01.npz") as maps:
        assert list(maps["channels"]) == CHANNELS[:-1]
    assert (tmp_path / "results" / "report" / "index.html").is_file()


@pytest.mark.workflow
@pytest.mark.parametrize("damage", ["missing", "short"])
def test_a_bad_data_file_ends_check_with_one_line_naming_it(tmp_path, damage):
    spec = _write_study(tmp_path, n_subjects=3)
    data_file = tmp_path / "data" / "sub-03" / "eeg" / "sub-03_task-mem_eeg.eeg"
    if damage == "missing":
        data_file.unlink()
    else:
        data_file.write_bytes(data_file.read_bytes()[:-1])
    result = _famwise("check", spec)
    assert result.returncode == 2, result.stdout + result.stderr
    [line] = result.stderr.strip().splitlines()
    assert line.startswith(f"famwise: error: subject 03: {data_file}: ") and "Traceback" not in result.stderr
    assert ("not found" if damage == "missing" else "not a whole number of time points") in line


def test_init_names_what_to_do_with_a_format_it_does_not_read(tmp_path):
    folder = tmp_path / "data" / "sub-01" / "eeg"
    folder.mkdir(parents=True)
    (folder / "sub-01_task-mem_eeg.set").write_bytes(b"\0")
    result = _famwise("init", tmp_path / "data")
    assert result.returncode == 2
    assert "convert the recordings with a general-purpose converter to EDF or .vhdr" in result.stderr


@pytest.mark.workflow
def test_the_example_study_gives_identical_maps_as_edf_and_as_vhdr(tmp_path):
    """The demo written twice from the same integer samples (steps of 2^-4 µV): the maps agree bit for bit."""
    maps = {}
    for fmt in ("edf", "vhdr"):
        spec = write_demo(tmp_path / fmt, fmt=fmt, resolution_uv=2.0**-4)
        assert main(["run", str(spec), "--cores", "2", "--", "tf/sub-01.npz", "tf/sub-03.npz"]) == 0
        maps[fmt] = {}
        for subject in ("01", "03"):  # sub-03 carries artefacts: some epochs rejected
            with np.load(tmp_path / fmt / "results" / "tf" / f"sub-{subject}.npz") as archive:
                maps[fmt][subject] = {key: archive[key] for key in archive.files}
            maps[fmt][subject]["info"] = (tmp_path / fmt / "results" / "tf" / f"sub-{subject}.json").read_text()
    assert sorted(p.suffix for p in (tmp_path / "vhdr" / "data" / "sub-01" / "eeg").glob("*_eeg.*")) == [
        ".eeg",
        ".json",
        ".vhdr",
        ".vmrk",
    ]
    for subject in ("01", "03"):
        edf, vision = maps["edf"][subject], maps["vhdr"][subject]
        assert edf.keys() == vision.keys()
        for key in edf:
            assert np.array_equal(edf[key], vision[key]), (subject, key)
    assert json.loads(maps["vhdr"]["03"]["info"])["rejected"] == {"high-load": 2, "low-load": 2}
