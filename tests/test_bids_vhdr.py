"""BIDS-EEG folders with `.vhdr` recordings: same epochs as EDF, channel rules, units, bad files, check notes."""

import csv

import numpy as np
import pytest
from vhdr_writer import write_with_pybv

from famwise import bids, bids_notes, bids_writing
from famwise.errors import FamwiseWarning, UserError

FS = 250.0
CHANNELS = ["Fz", "Cz", "Pz", "Oz", "HEOG", "ECG", "EMG1", "Misc", "Trig"]


def _recording(seed=0, seconds=20.0):
    rng = np.random.default_rng(seed)
    return rng.normal(0, 20e-6, (len(CHANNELS), int(seconds * FS) + 17)) + 1e-3  # 1 mV DC offset


def _events(n=12):
    return [(1.0 + 1.3 * i, 0.0, "face" if i % 3 else "house") for i in range(n)]


def _write(root, fmt, subject="01", data=None, **options):
    data = _recording() if data is None else data
    bids_writing.write_subject(
        root,
        subject,
        data=data,
        sample_rate_hz=FS,
        channels=CHANNELS,
        events=_events(),
        task="view",
        fmt=fmt,
        **options,
    )
    return root / f"sub-{subject}" / "eeg" / f"sub-{subject}_task-view_"


def _read(root, subject="01", **options):
    settings = dict(task="view", window_ms=(-200.0, 600.0), reject_peak_to_peak_uv=None, reference="none")
    return bids.read_subject(root, subject, **{**settings, **options})


def _set_channels(stem, types=None, status=None, units=None):
    path = stem.with_name(stem.name + "channels.tsv")
    rows = list(csv.DictReader(path.open(), delimiter="\t"))
    for row in rows:
        row["type"] = (types or {}).get(row["name"], row["type"])
        row["status"] = (status or {}).get(row["name"], row["status"])
        row["units"] = (units or {}).get(row["name"], row["units"])
    with path.open("w", newline="") as stream:
        writer = csv.DictWriter(stream, fieldnames=list(rows[0]), delimiter="\t", lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)


NON_EEG = {"HEOG": "EOG", "ECG": "ECG", "EMG1": "EMG", "Misc": "MISC", "Trig": "TRIG"}


@pytest.mark.parametrize("other", ["edf", "bdf"])
def test_vhdr_and_edf_give_identical_epochs(tmp_path, other):
    data = _recording()
    for fmt in ("vhdr", other):
        stem = _write(tmp_path / fmt, fmt, data=data, resolution_uv=0.25)
        _set_channels(stem, types=NON_EEG)
    # the same integer samples at a power-of-two step give the same float64 values, bit for bit
    vision = _read(tmp_path / "vhdr", reference="average", reject_peak_to_peak_uv=110.0)
    edf = _read(tmp_path / other, reference="average", reject_peak_to_peak_uv=110.0)
    assert vision.channels == edf.channels == ("Fz", "Cz", "Pz", "Oz")
    assert 0 < sum(vision.rejected.values()) < 12 and vision.rejected == edf.rejected
    assert np.array_equal(vision.data, edf.data) and np.array_equal(vision.labels, edf.labels)
    assert vision.sample_rate_hz == edf.sample_rate_hz and vision.epoch_start_s == edf.epoch_start_s
    # and those values are the written samples to within half a step (0.125 µV), plus as much in the removed mean
    first = _read(tmp_path / "vhdr").data[0]
    start = int(round(1.0 * FS)) - 50
    window = data[:4, start : start + 201]
    np.testing.assert_allclose(first, window - window.mean(axis=1, keepdims=True), rtol=0, atol=0.25e-6)


@pytest.mark.parametrize("fmt", ["edf", "vhdr"])
def test_non_eeg_and_bad_channels_are_left_out_by_one_rule(tmp_path, fmt):
    stem = _write(tmp_path, fmt)
    _set_channels(stem, types=NON_EEG, status={"Oz": "bad"})
    assert _read(tmp_path).channels == ("Fz", "Cz", "Pz")
    assert bids.read_channel_names(tmp_path, "01", task="view") == ["Fz", "Cz", "Pz"]
    _write(tmp_path, fmt, subject="02")
    _set_channels(tmp_path / "sub-02" / "eeg" / "sub-02_task-view_", types={"HEOG": "EOG", "Trig": "TRIG"})
    assert bids_notes.left_out_lines(tmp_path, ["01", "02"], "view") == [
        "Channels left out by _channels.tsv (types other than EEG, and status bad):",
        "  - ECG: ECG (1 of 2 subjects)",
        "  - EMG: EMG1 (1 of 2 subjects)",
        "  - EOG: HEOG",
        "  - MISC: Misc (1 of 2 subjects)",
        "  - TRIG: Trig",
        "  - bad: Oz (1 of 2 subjects)",
    ]


def test_header_units_give_volts(tmp_path):
    data = _recording()[:4]
    stem = _write(tmp_path, "vhdr", data=np.vstack([data, _recording()[4:]]))
    _set_channels(stem, types=NON_EEG, units={name: "n/a" for name in CHANNELS})
    # Source: pybv (a maintained general-purpose writer) storing each channel in its own unit.
    with pytest.warns(UserWarning):
        write_with_pybv(
            stem.parent,
            stem.name + "eeg",
            data,
            FS,
            CHANNELS[:4],
            overwrite=True,
            unit=["µV", "nV", "V", "mV"],
            resolution=np.array([0.5, 1.0, 1e-7, 1e-4]),
        )
    _set_channels(stem, types={name: "EEG" for name in CHANNELS[:4]})
    epochs = _read(tmp_path)
    start = int(round(1.0 * FS)) - 50
    window = data[:, start : start + 201]
    # float32 keeps about 7 digits of the 1 mV offset: 1e-10 V
    np.testing.assert_allclose(epochs.data[0], window - window.mean(axis=1, keepdims=True), rtol=0, atol=1e-10)
    _set_channels(
        stem, units={"Cz": "uV"}
    )  # the sidecar disagrees with the header's nV: the sidecar wins, with a warning
    with pytest.warns(
        FamwiseWarning,
        match=r"subject 01: channel Cz is in uV by _channels.tsv but in nV by the "
        r"header of its recording; using uV",
    ):
        _read(tmp_path)


def test_missing_or_short_data_file_is_one_error_naming_it(tmp_path):
    stem = _write(tmp_path, "vhdr")
    data_file = stem.with_name(stem.name + "eeg.eeg")
    data_file.write_bytes(data_file.read_bytes()[:-2])
    with pytest.raises(
        UserError,
        match=r"^subject 01: .*sub-01_task-view_eeg.eeg: holds \d+ bytes, not a whole "
        r"number of time points of 9 channels x 4 bytes \(IEEE_FLOAT_32\)",
    ):
        _read(tmp_path)
    data_file.unlink()
    with pytest.raises(
        UserError,
        match=r"^subject 01: .*sub-01_task-view_eeg.eeg: data file named by "
        r"sub-01_task-view_eeg.vhdr \(DataFile\) not found$",
    ):
        bids.read_channel_names(tmp_path, "01", task="view")


def test_a_format_not_read_is_named_with_what_to_do(tmp_path):
    folder = tmp_path / "sub-01" / "eeg"
    folder.mkdir(parents=True)
    (folder / "sub-01_task-view_eeg.set").write_bytes(b"\0")
    (folder / "sub-01_task-view_eeg.json").write_text("{}")
    with pytest.raises(
        UserError,
        match=r"subject 01: no EEG recording .* in .*eeg; found sub-01_task-view_eeg.set, in a "
        r"format famwise does not read: convert it with a general-purpose converter "
        r"to EDF or .vhdr$",
    ):
        _read(tmp_path)


def test_one_recording_in_two_formats_is_an_error(tmp_path):
    _write(tmp_path, "vhdr")
    _write(tmp_path, "edf")
    with pytest.raises(
        UserError,
        match=r"subject 01: one recording stored in several formats "
        r"\(sub-01_task-view_eeg.edf, sub-01_task-view_eeg.vhdr\)",
    ):
        _read(tmp_path)


def test_marker_count_disagreeing_with_events_is_warned_naming_both_files(tmp_path):
    stem = _write(tmp_path, "vhdr")
    assert bids_notes.marker_warnings(tmp_path, ["01"], "view") == []
    markers = stem.with_name(stem.name + "eeg.vmrk")
    lines = markers.read_text(encoding="utf-8").splitlines()
    markers.write_text("\n".join(line for line in lines if not line.startswith("Mk3=")) + "\n", encoding="utf-8")
    [warning] = bids_notes.marker_warnings(tmp_path, ["01"], "view")
    assert warning == (
        f"subject 01: {markers} holds 11 stimulus markers but {stem}events.tsv lists 12 events; "
        "epochs follow sub-01_task-view_events.tsv"
    )
    assert len(_read(tmp_path).labels) == 12  # epochs come from _events.tsv
    markers.unlink()
    [warning] = bids_notes.marker_warnings(tmp_path, ["01"], "view")
    assert warning.startswith(f"subject 01: the marker file {markers} named by sub-01_task-view_eeg.vhdr is missing")
