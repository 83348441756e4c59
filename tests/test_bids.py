"""BIDS-EEG input: EDF/BDF round trip, epoch counts, channels, participants, bad input."""

import csv
import json

import edfio
import numpy as np
import pytest

from famwise import bids, bids_writing
from famwise.errors import FamwiseWarning, UserError

FS = 250.0
CHANNELS = ["Fz", "Cz", "Pz", "Oz"]


def _recording(seed=0, seconds=30.0, n_channels=4):
    rng = np.random.default_rng(seed)
    n = int(seconds * FS) + 17  # not a whole number of 1-s records
    return rng.normal(0, 20e-6, (n_channels, n)) + 5e-3  # 5 mV DC offset, as amplifiers give


def _events(counts):
    """Interleaved events 1.2 s apart, starting at 1 s: counts = {label: n}."""
    labels = [lab for lab, n in counts.items() for _ in range(n)]
    order = np.random.default_rng(1).permutation(len(labels))
    return [(1.0 + 1.2 * i, 0.0, labels[j]) for i, j in enumerate(order)]


def _write(root, subject="01", data=None, events=None, **options):
    data = _recording() if data is None else data
    events = _events({"face": 8, "house": 6, "catch": 3}) if events is None else events
    bids_writing.write_subject(
        root, subject, data=data, sample_rate_hz=FS, channels=CHANNELS, events=events, task="view", **options
    )
    return data, events


def _read(root, subject="01", **options):
    settings = dict(task="view", window_ms=(-200.0, 600.0), reject_peak_to_peak_uv=None, reference="none")
    settings.update(options)
    return bids.read_subject(root, subject, **settings)


def _step(data):
    """EDF resolution per channel: physical range over 65535 digital steps (16 bit)."""
    return (data.max(axis=1) - data.min(axis=1)) / 65535


@pytest.mark.parametrize(("fmt", "bits"), [("edf", 16), ("bdf", 24)])
def test_round_trip_samples_and_events(tmp_path, fmt, bits):
    data, events = _write(tmp_path, fmt=fmt)
    # the file itself, read with edfio (the general-purpose EDF/BDF library)
    reader = edfio.read_edf if fmt == "edf" else edfio.read_bdf
    stored = reader(tmp_path / "sub-01" / "eeg" / f"sub-01_task-view_eeg.{fmt}")
    step = (data.max(axis=1) - data.min(axis=1)) / (2**bits - 1)
    for ch, signal in enumerate(stored.signals):
        assert signal.label == CHANNELS[ch] and signal.physical_dimension == "uV"
        np.testing.assert_allclose(signal.data[: data.shape[1]] * 1e-6, data[ch], atol=step[ch] * 0.51 + 1e-12)
    epochs = _read(tmp_path)
    assert epochs.sample_rate_hz == FS and epochs.epoch_start_s == pytest.approx(-0.2)
    assert epochs.channels == tuple(CHANNELS)
    assert epochs.data.shape == (len(events), 4, 201)  # -200..600 ms inclusive at 250 Hz
    assert epochs.labels.tolist() == [label for _, _, label in events]
    for k, (onset, _, _) in enumerate(events):
        first = int(round(onset * FS)) - 50
        segment = data[:, first : first + 201]
        segment = segment - segment.mean(axis=1, keepdims=True)  # epochs are demeaned
        np.testing.assert_allclose(epochs.data[k], segment, atol=float(step.max()) + 1e-12)
    assert epochs.rejected == {"catch": 0, "face": 0, "house": 0}


def test_folder_gives_epoch_counts_per_condition(tmp_path):
    _write(tmp_path, "01", events=_events({"face": 8, "house": 6, "catch": 3}))
    _write(tmp_path, "02", data=_recording(2), events=_events({"face": 5, "house": 9}))
    bids_writing.write_participants(
        tmp_path,
        [{"participant_id": "01", "group": "young", "age": "23"}, {"participant_id": "sub-02", "group": "old"}],
    )
    assert bids.discover_subjects(tmp_path) == ["01", "02"]
    counts = {}
    for subject in bids.discover_subjects(tmp_path):
        epochs = _read(tmp_path, subject, labels={"face", "house"})
        labels, n = np.unique(epochs.labels, return_counts=True)
        counts[subject] = dict(zip(labels.tolist(), n.tolist()))
    assert counts == {"01": {"face": 8, "house": 6}, "02": {"face": 5, "house": 9}}
    assert bids.read_participants(tmp_path) == {
        "01": {"group": "young", "age": "23"},
        "02": {"group": "old", "age": "n/a"},
    }
    description = json.loads((tmp_path / "dataset_description.json").read_text())
    assert description["BIDSVersion"] == bids_writing.BIDS_VERSION


def test_channels_file_drops_bad_and_non_eeg(tmp_path):
    _write(tmp_path, bad_channels=["Oz"])
    path = tmp_path / "sub-01" / "eeg" / "sub-01_task-view_channels.tsv"
    rows = list(csv.reader(path.open(), delimiter="\t"))
    rows[1][1] = "EOG"  # Fz becomes an eye channel
    with path.open("w", newline="") as stream:
        csv.writer(stream, delimiter="\t", lineterminator="\n").writerows(rows)
    assert _read(tmp_path).channels == ("Cz", "Pz")
    assert bids.read_channel_names(tmp_path, "01", task="view") == ["Cz", "Pz"]


def test_average_reference_and_rejection(tmp_path):
    data = _recording()
    events = _events({"face": 8, "house": 6})
    hit = next(k for k, (_, _, label) in enumerate(events) if label == "house")
    start = int(round(events[hit][0] * FS))
    data[1, start : start + 20] += 300e-6  # a 300 uV artefact inside one house epoch
    _write(tmp_path, data=data, events=events)
    epochs = _read(tmp_path, reference="average", reject_peak_to_peak_uv=150.0)
    assert epochs.rejected == {"face": 0, "house": 1}
    assert epochs.data.shape[0] == 13
    np.testing.assert_allclose(epochs.data.mean(axis=1), 0.0, atol=1e-15)
    with pytest.raises(
        UserError,
        match=r"subject 01: all 14 epochs exceed the peak-to-peak "
        r"limit of 1 µV in .*sub-01_task-view_eeg.edf",
    ):
        _read(tmp_path, reject_peak_to_peak_uv=1.0)


def test_electrodes_file(tmp_path):
    assert bids.electrodes_file(tmp_path, "01", task="view") is None
    _write(tmp_path, electrodes={"Fz": (0.0, 60.0, 70.0), "Cz": (0.0, 0.0, 95.0)})
    path = bids.electrodes_file(tmp_path, "01", task="view")
    assert path.name == "sub-01_electrodes.tsv"
    rows = list(csv.DictReader(path.open(), delimiter="\t"))
    assert rows[0] == {"name": "Fz", "x": "0.0000", "y": "60.0000", "z": "70.0000"}


def test_missing_files(tmp_path):
    with pytest.raises(
        UserError,
        match=r"subject 01: no EEG recording \(sub-01_..._eeg.edf, .bdf or "
        r".vhdr\) for task 'view' in",
    ):
        _read(tmp_path)
    _write(tmp_path)
    (tmp_path / "sub-01" / "eeg" / "sub-01_task-view_events.tsv").unlink()
    with pytest.raises(
        UserError,
        match=r"subject 01: events file .*sub-01_task-view_events.tsv "
        r"is missing",
    ):
        _read(tmp_path)
    with pytest.raises(UserError, match=r"BIDS folder .*nowhere does not exist"):
        bids.discover_subjects(tmp_path / "nowhere")
    assert bids.read_participants(tmp_path) == {}


def test_event_errors(tmp_path):
    _write(tmp_path)
    with pytest.raises(
        UserError,
        match=r"subject 01: events file .* has none of the trial_type "
        r"values \['tree'\]; found \['catch', 'face', 'house'\]",
    ):
        _read(tmp_path, labels={"tree"})
    path = tmp_path / "sub-01" / "eeg" / "sub-01_task-view_events.tsv"
    path.write_text(path.read_text().replace("trial_type", "kind"))
    with pytest.raises(
        UserError,
        match=r"subject 01: events file .* has no 'trial_type' column; "
        r"found \['onset', 'duration', 'kind', 'sample'\]",
    ):
        _read(tmp_path)
    path.write_text("onset\tduration\ttrial_type\nsoon\t0\tface\n")
    with pytest.raises(UserError, match=r"line 2: onset 'soon' is not a number"):
        _read(tmp_path)


def test_window_beyond_recording(tmp_path):
    _write(tmp_path, events=[(0.1, 0.0, "face"), (5.0, 0.0, "face")])
    with pytest.raises(
        UserError,
        match=r"subject 01: the epoch window -200 to 600 ms around the "
        r"event at onset 0.1 s runs beyond the recording",
    ):
        _read(tmp_path)
    with pytest.raises(UserError, match=r"epoch window must run forward, got 600 to -200 ms"):
        _read(tmp_path, window_ms=(600.0, -200.0))
    with pytest.raises(UserError, match=r"reference must be 'average' or 'none', got 'Cz'"):
        _read(tmp_path, reference="Cz")


def test_nan_samples(tmp_path):
    _write(tmp_path)
    path = tmp_path / "sub-01" / "eeg" / "sub-01_task-view_eeg.edf"
    raw = bytearray(path.read_bytes())
    n_signals = 4
    physical_min = 256 + n_signals * (16 + 80 + 8)  # EDF header layout (Kemp et al. 1992)
    raw[physical_min + 8 : physical_min + 16] = b"nan     "  # Cz: calibration gives NaN
    path.write_bytes(bytes(raw))
    with pytest.raises(
        UserError,
        match=r"subject 01: channel Cz holds NaN or infinite samples \(first at 0 s, epoch 0 "
        r"\(event at [\d.]+ s\)\) in .*sub-01_task-view_eeg.edf",
    ):
        _read(tmp_path)


def test_recording_and_channel_errors(tmp_path):
    _write(tmp_path)
    eeg = tmp_path / "sub-01" / "eeg"
    (eeg / "sub-01_task-rest_eeg.edf").write_bytes((eeg / "sub-01_task-view_eeg.edf").read_bytes())
    with pytest.raises(UserError, match=r"subject 01: several EEG recordings of different tasks, set the task"):
        _read(tmp_path, task=None)
    (eeg / "sub-01_task-rest_eeg.edf").write_bytes(b"garbage")
    (eeg / "sub-01_task-rest_events.tsv").write_text("onset\ttrial_type\n2.0\tface\n")
    with pytest.raises(UserError, match=r"subject 01: cannot read the recording .*rest_eeg.edf"):
        _read(tmp_path, task="rest")
    channels = eeg / "sub-01_task-view_channels.tsv"
    channels.write_text(channels.read_text() + "T7\tEEG\tuV\tgood\n")
    with pytest.raises(UserError, match=r"channels \['T7'\] of the channels file are not in"):
        _read(tmp_path)
    channels.write_text("name\ttype\tunits\tstatus\nFz\tEEG\tparsec\tgood\n")
    with pytest.warns(FamwiseWarning, match=r"unit 'parsec' of channel Fz .* assuming microvolts"):
        assert _read(tmp_path).channels == ("Fz",)
    channels.write_text("name\ttype\nFz\tEOG\n")
    with pytest.raises(UserError, match=r"subject 01: no good EEG channel in"):
        _read(tmp_path)


def test_write_errors(tmp_path):
    with pytest.raises(
        UserError,
        match=r"subject 01: data must have shape \(n_channels=4, "
        r"n_samples\), got \(3, 100\)",
    ):
        bids_writing.write_subject(
            tmp_path, "01", data=np.zeros((3, 100)), sample_rate_hz=FS, channels=CHANNELS, events=[], task="view"
        )
    with pytest.raises(UserError, match=r"format must be one of edf, bdf, vhdr, got 'gdf'"):
        _write(tmp_path, fmt="gdf")
    with pytest.raises(UserError, match=r"every participants row needs a 'participant_id'"):
        bids_writing.write_participants(tmp_path, [{"group": "a"}])


def test_more_file_errors(tmp_path):
    _write(tmp_path)
    eeg = tmp_path / "sub-01" / "eeg"
    (eeg / "sub-01_task-view_channels.tsv").unlink()
    assert _read(tmp_path).channels == tuple(CHANNELS)  # no channels file: every signal kept
    (eeg / "sub-01_task-view_channels.tsv").write_text("label\tkind\nFz\tEEG\n")
    with pytest.raises(
        UserError,
        match=r"subject 01: channels file .* needs 'name' and 'type' "
        r"columns, found \['label', 'kind'\]",
    ):
        _read(tmp_path)
    (eeg / "sub-01_task-view_channels.tsv").unlink()
    signals = [edfio.EdfSignal(np.zeros(2500), 250.0, label="Fz"), edfio.EdfSignal(np.zeros(5000), 500.0, label="Cz")]
    edfio.Edf(signals).write(eeg / "sub-01_task-view_eeg.edf")
    with pytest.raises(
        UserError,
        match=r"subject 01: the EEG channels of .* have different "
        r"sampling rates \[250.0, 500.0\] Hz",
    ):
        _read(tmp_path)
    (tmp_path / "participants.tsv").write_text("subject\tgroup\n01\ta\n")
    with pytest.raises(
        UserError,
        match=r"participants.tsv must have a 'participant_id' column, "
        r"found \['subject', 'group'\]",
    ):
        bids.read_participants(tmp_path)
    with pytest.raises(UserError, match=r"subject 02: cannot write .*sub-02_task-view_eeg.edf"):
        bids_writing.write_subject(
            tmp_path,
            "02",
            data=np.zeros((1, 500)),
            sample_rate_hz=FS,
            channels=["a-very-long-channel-name"],
            events=[],
            task="view",
        )


def test_runs_of_one_task_are_pooled_on_their_common_good_channels(tmp_path):
    # BIDS 1.9 file naming sub-<label>_task-<label>_run-<index>_eeg.<ext> (BIDS-EEG: Pernet et al. 2019)
    first, first_events = _write(tmp_path, events=_events({"face": 4, "house": 2}), run=1)
    second, second_events = _write(
        tmp_path, data=_recording(seed=5), events=_events({"face": 3, "house": 5}), run=2, bad_channels=["Oz"]
    )
    with pytest.warns(FamwiseWarning, match=r"channels \['Oz'\] are not good in every recording"):
        epochs = _read(tmp_path)
    assert epochs.channels == ("Fz", "Cz", "Pz")
    assert list(epochs.labels) == [label for *_, label in first_events + second_events]
    alone = [_read_single(tmp_path, run) for run in (1, 2)]
    np.testing.assert_array_equal(epochs.data, np.concatenate([alone[0].data[:, :3], alone[1].data]))
    assert bids.read_channel_names(tmp_path, "01", task="view") == ["Fz", "Cz", "Pz"]


def _read_single(root, run):
    """One run read alone: the other run's files moved away for the call."""
    eeg = root / "sub-01" / "eeg"
    other = 2 if run == 1 else 1
    hidden = root / "hidden"
    hidden.mkdir(exist_ok=True)
    moved = [path.rename(hidden / path.name) for path in eeg.glob(f"*_run-{other}_*")]
    try:
        return _read(root)
    finally:
        for path in moved:
            path.rename(eeg / path.name)


def test_written_electrodes_are_read_back_in_their_sidecar_units(tmp_path):
    # BIDS: _coordsystem.json's EEGCoordinateUnits gives the unit of _electrodes.tsv (bidsschematools 2.0.1 schema)
    import warnings

    from famwise.electrodes.positions import read_positions

    positions = {"Fz": (0.0, 60.0, 60.0), "Cz": (0.0, 0.0, 85.0), "Pz": (0.0, -60.0, 60.0), "Oz": (0.0, -85.0, 0.0)}
    _write(tmp_path, electrodes=positions)
    path = bids.electrodes_file(tmp_path, "01", task="view")
    with warnings.catch_warnings():
        warnings.simplefilter("error", FamwiseWarning)  # no "assuming mm" guess: the sidecar says mm
        read = read_positions(path)
    assert read.names == tuple(positions)
    np.testing.assert_allclose(read.xyz, np.array(list(positions.values())))


def test_planner_finds_recordings_stored_in_sessions(tmp_path):
    # BIDS 1.9: sub-<label>/ses-<label>/eeg/sub-<label>_ses-<label>_task-<label>_eeg.<ext> (BIDS-EEG: Pernet et al. 2019)
    from famwise.plan import Plan

    root = tmp_path / "data"
    _write(root)
    session = root / "sub-01" / "ses-1" / "eeg"
    session.mkdir(parents=True)
    for path in sorted((root / "sub-01" / "eeg").iterdir()):
        path.rename(session / path.name.replace("sub-01_", "sub-01_ses-1_"))
    (root / "sub-01" / "eeg").rmdir()
    spec = tmp_path / "study.yaml"
    spec.write_text(
        "version: 1\nname: sessions\nsubjects: {source: bids, path: data, task: view}\n"
        "conditions: {face: [face]}\ncontrasts: [{name: face, test: one-sample, conditions: [face]}]\n"
        "inference: {corrections: [{method: holm}]}\n"
    )
    plan = Plan.from_spec(spec)
    files = plan.input_files("01")
    assert str(session / "sub-01_ses-1_task-view_eeg.edf") in files
    assert all("/ses-1/eeg/" in f for f in files)
    assert len(_read(root).labels) == 17  # the reader reads what the planner declared (8 + 6 + 3 events)
