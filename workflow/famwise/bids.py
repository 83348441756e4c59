"""BIDS-EEG input: EDF, BDF or `.vhdr` recordings with their events, channels and participants.

Reading: the recordings ``sub-<id>/[ses-<s>/]eeg/sub-<id>_..._task-<task>[_run-<n>]_eeg.edf|.bdf|.vhdr``
(`famwise.recordings`), ``_channels.tsv`` (one rule for every format: channels of
type EEG not marked bad are kept, other types such as EOG, ECG, EMG, MISC and TRIG
are left out; without the file every signal is kept), ``_events.tsv`` (``onset``
in s and ``trial_type``; a `.vmrk` marker file is not needed) and ``participants.tsv``.
Epochs are cut around each event with the epoch window; each epoch has its
mean removed per channel (recordings often carry large DC offsets).
A subject's runs and sessions of the task are pooled, on the channels good in
all of them; then an optional average reference and peak-to-peak rejection
apply.

Writing such folders (the example study, tests) is `famwise.bids_writing`.
"""

import csv
import warnings
from pathlib import Path
from typing import NamedTuple

import numpy as np

from famwise.epochs import Epochs
from famwise.errors import FamwiseWarning, UserError
from famwise.recordings import SUFFIXES, Recording, open_recording

_UNITS_TO_VOLTS = {"v": 1.0, "mv": 1e-3, "uv": 1e-6, "µv": 1e-6, "μv": 1e-6, "nv": 1e-9}


def discover_subjects(root: Path) -> list[str]:
    """Subject ids (without ``sub-``) of the ``sub-*`` folders under ``root``, sorted."""
    root = Path(root)
    if not root.is_dir():
        raise UserError(f"BIDS folder {root} does not exist")
    return sorted(p.name[4:] for p in root.glob("sub-*") if p.is_dir())


def read_participants(root: Path) -> dict[str, dict[str, str]]:
    """The rows of ``participants.tsv``, keyed by subject id without ``sub-``.

    Returns an empty dict when the file is absent (it is optional in BIDS).
    """
    path = Path(root) / "participants.tsv"
    if not path.is_file():
        return {}
    rows = read_tsv(path)
    if rows and "participant_id" not in rows[0]:
        raise UserError(f"{path} must have a 'participant_id' column, found {list(rows[0])}")
    return {_strip_sub(row["participant_id"]): {k: v for k, v in row.items() if k != "participant_id"} for row in rows}


def electrodes_file(root: Path, subject: str, *, task: str | None = None) -> Path | None:
    """The subject's ``_electrodes.tsv``, preferring one named with ``task``; None if absent."""
    sub_dir = Path(root) / f"sub-{subject}"
    found = sorted(sub_dir.glob(f"eeg/sub-{subject}*_electrodes.tsv")) + sorted(
        sub_dir.glob(f"ses-*/eeg/sub-{subject}*_electrodes.tsv")
    )
    if task is not None:
        named = [p for p in found if f"_task-{task}_" in p.name]
        found = named or found
    return found[0] if found else None


def read_channel_names(root: Path, subject: str, *, task: str | None = None) -> list[str]:
    """Names of the channels `read_subject` keeps (EEG, good in every run), read from the headers only.

    Raises
    ------
    UserError
        As `read_subject` for a missing or unreadable recording or channels file.
    """
    kept = []
    for path in find_recordings(Path(root), subject, task):
        table = read_channels(sidecar(path, "channels.tsv"), subject)
        recording = open_recording(path, subject, headers_only=True)
        kept.append([signal.label for signal in _kept_signals(recording, table, subject)])
    return _shared(kept)


def read_subject(
    root: Path,
    subject: str,
    *,
    task: str | None,
    window_ms: tuple[float, float],
    reject_peak_to_peak_uv: float | None,
    reference: str,
    labels: set[str] | None = None,
) -> Epochs:
    """Epochs of one subject from a BIDS-EEG folder.

    Parameters
    ----------
    root : Path
        The BIDS folder.
    subject : str
        Subject id without ``sub-``.
    task : str or None
        Task label; None when the subject's recordings all belong to one task.
        Several recordings of the task (runs, sessions) are pooled: their
        epochs are concatenated in session and run order, on the channels
        good in every recording (a warning names the others).
    window_ms : (float, float)
        Epoch window around each event onset in ms, e.g. (-500, 1500); both
        ends are rounded to the nearest sample and included.
    reject_peak_to_peak_uv : float or None
        Reject epochs where any channel's peak-to-peak amplitude exceeds this (µV).
    reference : {"average", "none"}
        Re-reference to the average of the kept channels, or keep the recorded reference.
    labels : set of str, optional
        Keep events whose ``trial_type`` is in this set (all events if None).

    Returns
    -------
    Epochs
        ``data`` (n_epochs, n_channels, n_samples) in volts; ``rejected`` maps
        every kept label to its number of rejected epochs.

    Raises
    ------
    UserError
        Naming the subject and file: no recording, unreadable recording,
        missing events file or ``trial_type`` column, none of the wanted
        labels, NaN/inf samples, an epoch window beyond the recording,
        every epoch rejected.
    """
    if reference not in ("average", "none"):
        raise UserError(f"subject {subject}: reference must be 'average' or 'none', got {reference!r}")
    start_ms, stop_ms = window_ms
    if not start_ms < stop_ms:
        raise UserError(f"subject {subject}: epoch window must run forward, got {start_ms:g} to {stop_ms:g} ms")
    recordings = find_recordings(Path(root), subject, task)
    runs = [_cut_epochs(path, subject, window_ms, labels) for path in recordings]
    channels = _common_channels([run.channels for run in runs], recordings, subject)
    sample_rates_hz = {run.sample_rate_hz for run in runs}
    if len(sample_rates_hz) > 1:
        raise UserError(
            f"subject {subject}: the recordings {[p.name for p in recordings]} have different "
            f"sampling rates {sorted(sample_rates_hz)} Hz"
        )
    data = np.concatenate([run.data[:, [run.channels.index(c) for c in channels]] for run in runs])
    names = np.concatenate([run.labels for run in runs])
    sample_rate_hz, first_offset = runs[0].sample_rate_hz, runs[0].first_offset
    if reference == "average":
        data -= data.mean(axis=1, keepdims=True)

    keep = np.ones(len(names), dtype=bool)
    if reject_peak_to_peak_uv is not None:
        peak_to_peak = np.ptp(data, axis=-1).max(axis=-1)
        keep = peak_to_peak <= reject_peak_to_peak_uv * 1e-6
        if not keep.any():
            raise UserError(
                f"subject {subject}: all {keep.size} epochs exceed the peak-to-peak "
                f"limit of {reject_peak_to_peak_uv:g} µV in {_listing(recordings)}"
            )
    rejected = {str(lab): int(np.sum(~keep & (names == lab))) for lab in np.unique(names)}
    return Epochs(
        data=data[keep],
        sample_rate_hz=float(sample_rate_hz),
        epoch_start_s=first_offset / sample_rate_hz,
        channels=tuple(channels),
        labels=names[keep],
        rejected=rejected,
    )


class _Cut(NamedTuple):
    """Epochs of one recording: data (n_epochs, n_channels, n_samples) in volts, sample_rate_hz in Hz, offset of the
    first sample from the event in samples, channel names, event labels (n_epochs,)."""

    data: np.ndarray
    sample_rate_hz: float
    first_offset: int
    channels: list[str]
    labels: np.ndarray


def _cut_epochs(path: Path, subject: str, window_ms: tuple[float, float], labels: set[str] | None) -> _Cut:
    """Epochs of one recording, each with its mean removed per channel."""
    start_ms, stop_ms = window_ms
    events = _read_events(sidecar(path, "events.tsv"), subject, labels)
    table = read_channels(sidecar(path, "channels.tsv"), subject)
    recording = open_recording(path, subject)
    signals = _kept_signals(recording, table, subject)
    sample_rate_hz = signals[0].sample_rate_hz
    n_total = int(round(recording.duration_s * sample_rate_hz))

    first_offset = int(round(start_ms * sample_rate_hz / 1000.0))
    n_samples = int(round(stop_ms * sample_rate_hz / 1000.0)) - first_offset + 1
    starts = []
    for onset, _ in events:
        first = int(round(onset * sample_rate_hz)) + first_offset
        if first < 0 or first + n_samples > n_total:
            raise UserError(
                f"subject {subject}: the epoch window {start_ms:g} to {stop_ms:g} ms "
                f"around the event at onset {onset:g} s runs beyond the recording "
                f"(0 to {n_total / sample_rate_hz:g} s) in {path}"
            )
        starts.append(first)
    window = np.asarray(starts)[:, None] + np.arange(n_samples)[None, :]

    data = np.empty((len(starts), len(signals), n_samples))
    stored = recording.read([signal.label for signal in signals])
    for ch, signal in enumerate(signals):
        samples = stored[ch] * _unit_factor(signal, table, subject)
        bad = ~np.isfinite(samples)
        if bad.any():
            first_bad = np.flatnonzero(bad)[0] / sample_rate_hz
            hit = np.flatnonzero(bad[window].any(axis=1))
            epoch = f", epoch {hit[0]} (event at {events[hit[0]][0]:g} s)" if hit.size else ", outside every epoch"
            raise UserError(
                f"subject {subject}: channel {signal.label} holds NaN or infinite "
                f"samples (first at {first_bad:g} s{epoch}) in {path}"
            )
        data[:, ch, :] = samples[window]
    data -= data.mean(axis=-1, keepdims=True)
    return _Cut(
        data, float(sample_rate_hz), first_offset, [s.label for s in signals], np.array([lab for _, lab in events])
    )


def _common_channels(names: list[list[str]], recordings: list[Path], subject: str) -> list[str]:
    """Channels kept in every recording (``names``: each one's), in the first one's order; warns about the others."""
    common = _shared(names)
    dropped = sorted({c for other in names for c in other} - set(common))
    if not common:
        raise UserError(f"subject {subject}: the recordings {[p.name for p in recordings]} share no good EEG channel")
    if dropped:
        warnings.warn(
            f"subject {subject}: channels {dropped} are not good in every recording "
            f"({_listing(recordings)}) and are left out",
            FamwiseWarning,
            stacklevel=3,
        )
    return common


def _shared(names: list[list[str]]) -> list[str]:
    """The names in every list, in the first list's order."""
    return [c for c in names[0] if all(c in other for other in names[1:])]


def _listing(recordings: list[Path]) -> str:
    return str(recordings[0]) if len(recordings) == 1 else ", ".join(p.name for p in recordings)


def _strip_sub(value: str) -> str:
    return value[4:] if value.startswith("sub-") else value


def read_tsv(path: Path) -> list[dict[str, str]]:
    """Rows of a BIDS tab-separated file as dicts keyed by its header line."""
    with path.open(newline="", encoding="utf-8") as stream:
        return [dict(row) for row in csv.DictReader(stream, delimiter="\t")]


RECORDING_FOLDERS = ("eeg", "ses-*/eeg")
"""Where a subject's recordings are, relative to ``sub-<id>/``: without sessions, and in each session."""


def subject_files(root: Path, subject: str, *, task: str | None) -> list[Path]:
    """Every file of a subject in its recording folders (of one task when given), sorted.

    The planner declares these as the subject's inputs; the reader picks its
    recordings among them (:func:`find_recordings`).
    """
    sub_dir = Path(root) / f"sub-{subject}"
    found = [p for folder in RECORDING_FOLDERS for p in sub_dir.glob(f"{folder}/sub-{subject}_*")]
    return sorted(p for p in found if task is None or f"_task-{task}_" in p.name)


def recording_files(root: Path, subject: str) -> list[Path]:
    """Every recording of a subject in a format famwise reads (``*_eeg.edf|.bdf|.vhdr`` in eeg/ and ses-*/eeg/)."""
    sub_dir = Path(root) / f"sub-{subject}"
    return [
        p
        for folder in RECORDING_FOLDERS
        for suffix in SUFFIXES
        for p in sorted(sub_dir.glob(f"{folder}/*_eeg{suffix}"))
    ]


def find_recordings(root: Path, subject: str, task: str | None) -> list[Path]:
    """The subject's recordings of one task: one, or several runs or sessions (pooled).

    Without a task, the recordings must all belong to one task. One recording
    stored in two formats is an error (it would be pooled twice).
    """
    sub_dir = Path(root) / f"sub-{subject}"
    found = recording_files(root, subject)
    if task is not None:
        found = [p for p in found if f"_task-{task}_" in p.name]
    where = f" for task {task!r}" if task is not None else ""
    if not found:
        others = sorted(
            p.name for p in sub_dir.glob("**/*_eeg.*") if p.suffix.lower() not in (*SUFFIXES, ".json", ".eeg", ".vmrk")
        )
        hint = (
            (
                f"; found {', '.join(others)}, in a format famwise does not read: convert it with a general-purpose "
                "converter to EDF or .vhdr"
            )
            if others
            else ""
        )
        raise UserError(
            f"subject {subject}: no EEG recording (sub-{subject}_..._eeg.edf, .bdf or "
            f".vhdr){where} in {sub_dir / 'eeg'}{hint}"
        )
    stems = [p.with_suffix("") for p in found]
    twice = sorted({p.name for p in found if stems.count(p.with_suffix("")) > 1})
    if twice:
        raise UserError(
            f"subject {subject}: one recording stored in several formats ({', '.join(twice)}); "
            "keep one of them in the BIDS folder"
        )
    tasks = {_entity(p.name, "task") for p in found}
    if len(tasks) > 1:
        raise UserError(
            f"subject {subject}: several EEG recordings of different tasks, set the task to "
            f"choose one: {[p.name for p in found]}"
        )
    return sorted(found, key=lambda p: (_entity(p.name, "ses"), _run_number(p.name), p.name))


def _entity(name: str, key: str) -> str:
    """Value of a BIDS entity (``key-value``) in a file name, '' when absent."""
    for part in name.split("_"):
        if part.startswith(f"{key}-"):
            return part[len(key) + 1 :]
    return ""


def _run_number(name: str) -> int:
    run = _entity(name, "run")
    return int(run) if run.isdigit() else 0


def _read_events(path: Path, subject: str, labels: set[str] | None) -> list[tuple[float, str]]:
    """(onset s, trial_type) of the wanted events, in file order."""
    if not path.is_file():
        raise UserError(f"subject {subject}: events file {path} is missing")
    rows = read_tsv(path)
    columns = list(rows[0]) if rows else []
    for column in ("onset", "trial_type"):
        if column not in columns:
            raise UserError(f"subject {subject}: events file {path} has no {column!r} column; found {columns}")
    events = []
    for line, row in enumerate(rows, start=2):
        label = row["trial_type"]
        if label == "n/a" or (labels is not None and label not in labels):
            continue
        try:
            events.append((float(row["onset"]), label))
        except ValueError:
            raise UserError(
                f"subject {subject}: events file {path}, line {line}: onset {row['onset']!r} is not a number"
            ) from None
    if not events:
        found = sorted({row["trial_type"] for row in rows})
        raise UserError(
            f"subject {subject}: events file {path} has none of the trial_type "
            f"values {sorted(labels) if labels else 'wanted'}; found {found}"
        )
    return events


def sidecar(recording: Path, suffix: str) -> Path:
    """The file beside a recording that shares its name up to ``_eeg``, e.g. ``sidecar(p, "events.tsv")``."""
    return recording.parent / f"{recording.name.rsplit('_eeg.', 1)[0]}_{suffix}"


def read_channels(path: Path, subject: str) -> dict[str, dict[str, str]] | None:
    """Rows of ``_channels.tsv`` by name; None when the file is absent (keep all signals)."""
    if not path.is_file():
        return None
    rows = read_tsv(path)
    if rows and not {"name", "type"} <= set(rows[0]):
        raise UserError(
            f"subject {subject}: channels file {path} needs 'name' and 'type' columns, found {list(rows[0])}"
        )
    return {row["name"]: row for row in rows}


def left_out_channels(table: dict[str, dict[str, str]]) -> dict[str, str]:
    """Channels of a ``_channels.tsv`` left out of the analysis, with why: their type when it is not EEG
    (EOG, ECG, EMG, MISC, TRIG, ...), else ``bad`` for status bad. The one rule for every format."""
    left_out = {}
    for name, row in table.items():
        kind = (row.get("type") or "").strip().upper()
        if kind != "EEG":
            left_out[name] = kind or "no type"
        elif (row.get("status") or "good").strip().lower() == "bad":
            left_out[name] = "bad"
    return left_out


def _kept_signals(recording: Recording, table, subject: str) -> list:
    """Signals not left out by ``_channels.tsv`` (`left_out_channels`; all signals without one)."""
    by_label = {s.label: s for s in recording.signals}
    if table is None:
        kept = list(recording.signals)
    else:
        left_out = left_out_channels(table)
        names = [name for name in table if name not in left_out]
        missing = [name for name in names if name not in by_label]
        if missing:
            raise UserError(
                f"subject {subject}: channels {missing} of the channels file are not "
                f"in {recording.path}, which holds {list(by_label)}"
            )
        kept = [by_label[name] for name in names]
    if not kept:
        raise UserError(f"subject {subject}: no good EEG channel in {recording.path}")
    rates = {s.sample_rate_hz for s in kept}
    if len(rates) > 1:
        raise UserError(
            f"subject {subject}: the EEG channels of {recording.path} have different sampling rates {sorted(rates)} Hz"
        )
    return kept


def _unit_factor(signal, table, subject: str) -> float:
    """Volts per stored unit, from ``_channels.tsv`` units or else the recording's header (a warning when they differ)."""
    unit = ""
    if table is not None and signal.label in table:
        unit = table[signal.label].get("units", "") or ""
    if unit in ("", "n/a"):
        unit = signal.unit
    else:
        given, stated = (_UNITS_TO_VOLTS.get(text.strip().lower()) for text in (unit, signal.unit))
        if given is not None and stated is not None and given != stated:
            warnings.warn(
                f"subject {subject}: channel {signal.label} is in {unit} by _channels.tsv but in "
                f"{signal.unit} by the header of its recording; using {unit}",
                FamwiseWarning,
                stacklevel=3,
            )
    factor = _UNITS_TO_VOLTS.get(unit.strip().lower())
    if factor is None:
        warnings.warn(
            f"subject {subject}: unit {unit!r} of channel {signal.label} is not one of "
            "V, mV, uV, nV; assuming microvolts",
            FamwiseWarning,
            stacklevel=3,
        )
        return 1e-6
    return factor
