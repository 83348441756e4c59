"""What the checks need from each subject's inputs, read from headers and events only.

Epochs NPZ: the small arrays (sample_rate_hz, epoch_start_s, channels, event_labels, bad) and the
data array's shape from its ``.npy`` header. BIDS: the EDF/BDF headers
(fixed-width ASCII, the European Data Format specification, Kemp et al. 1992,
2003), ``_channels.tsv`` and ``_events.tsv``. No sample is read.
"""

import zipfile
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from famwise import bids, vhdr
from famwise.errors import UserError


@dataclass
class SubjectHeader:
    """One subject's inputs as the decomposition will see them.

    Attributes
    ----------
    sample_rate_hz : float or None
        Sampling rate in Hz (None when the recording format's header is not read here).
    epoch_start_s : float
        Time of the first epoch sample relative to the event, in s.
    n_samples : int
        Samples per epoch.
    channels : list of str or None
        Channels the decomposition keeps, in order (None when not read here).
    labels : Counter
        Number of epochs per event label (after ``bad`` epochs are dropped).
    beyond : str or None
        The first event whose epoch window runs beyond its recording (BIDS).
    source : str
        The file (epochs) or folder (BIDS) read, for messages.
    """

    sample_rate_hz: float | None
    epoch_start_s: float
    n_samples: int
    channels: list[str] | None
    labels: Counter = field(default_factory=Counter)
    beyond: str | None = None
    source: str = ""


def npz_epochs_header(path: Path, subject: str) -> SubjectHeader:
    """Header of an epochs NPZ file (the ``data`` array itself is not read)."""
    where = f"subject {subject} ({path})"
    try:
        with np.load(path, allow_pickle=False) as archive:
            missing = [
                k
                for k in ("data", "sample_rate_hz", "epoch_start_s", "channels", "event_labels")
                if k not in archive.files
            ]
            if missing:
                raise UserError(
                    f"{where}: missing key(s) {', '.join(missing)} (an epochs file has data, sample_rate_hz, epoch_start_s, channels, event_labels)"
                )
            sample_rate_hz, epoch_start_s = float(archive["sample_rate_hz"]), float(archive["epoch_start_s"])
            channels = [str(c) for c in archive["channels"]]
            labels = np.array([str(c) for c in archive["event_labels"]])
            bad = archive["bad"].astype(bool) if "bad" in archive.files else np.zeros(labels.size, dtype=bool)
        shape = _npy_shape(path, "data.npy")
    except (OSError, ValueError, zipfile.BadZipFile) as error:
        raise UserError(f"{where}: not a readable NPZ file ({error})") from None
    if len(shape) != 3:
        raise UserError(f"{where}: data must have shape (n_epochs, n_channels, n_times), got {shape}")
    if len(channels) != shape[1] or labels.shape != (shape[0],) or bad.shape != labels.shape:
        raise UserError(
            f"{where}: {len(channels)} channel names and {labels.size} condition labels for data of shape {shape}"
        )
    if not sample_rate_hz > 0:
        raise UserError(f"{where}: sample_rate_hz must be positive, got {sample_rate_hz}")
    return SubjectHeader(
        sample_rate_hz, epoch_start_s, shape[2], channels, Counter(labels[~bad].tolist()), source=str(path)
    )


def _npy_shape(path: Path, member: str) -> tuple[int, ...]:
    """Shape of one array of an NPZ archive, from its ``.npy`` header."""
    with zipfile.ZipFile(path) as archive, archive.open(member) as stream:
        version = np.lib.format.read_magic(stream)
        read = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
        shape, _, _ = read(stream)
    return tuple(shape)


def bids_header(
    root: Path, subject: str, *, task: str | None, window_ms: tuple[float, float], wanted: set[str]
) -> SubjectHeader:
    """Header of one BIDS subject: the recordings pooled as `famwise.bids.read_subject` pools them."""
    recordings = bids.find_recordings(Path(root), subject, task)
    channels, labels, rates, beyond = [], Counter(), set(), None
    for recording in recordings:
        table = bids.read_channels(bids.sidecar(recording, "channels.tsv"), subject)
        signals, duration = _recording_signals(recording, subject)
        kept = _kept(signals, table, recording, subject)
        channels.append(list(kept))
        rates.update(kept.values())
        events = _events(bids.sidecar(recording, "events.tsv"), subject)
        labels.update(label for _, label in events)
        rate = next(iter(kept.values()))
        beyond = beyond or _first_beyond(events, wanted, window_ms, duration, rate, recording)
    if len(channels) < len(recordings):
        return SubjectHeader(None, 0.0, 0, None, labels, source=str(recordings[0].parent))
    if len(rates) != 1:
        raise UserError(
            f"subject {subject}: the recordings {[p.name for p in recordings]} have different sampling rates {sorted(rates)} Hz"
        )
    sample_rate_hz = rates.pop()
    first = int(round(window_ms[0] * sample_rate_hz / 1000.0))
    n_samples = int(round(window_ms[1] * sample_rate_hz / 1000.0)) - first + 1
    return SubjectHeader(
        sample_rate_hz,
        first / sample_rate_hz,
        n_samples,
        bids._shared(channels),
        labels,
        beyond,
        source=str(recordings[0].parent),
    )


def _recording_signals(path: Path, subject: str) -> tuple[dict[str, float], float]:
    """Signal label -> sampling rate (Hz), and the duration (s), from an EDF/BDF or `.vhdr` header."""
    if path.suffix.lower() == ".vhdr":
        try:
            header = vhdr.read_header(path)
        except UserError as error:
            raise UserError(f"subject {subject}: {error}") from None
        return {c.name: header.sample_rate_hz for c in header.channels}, header.n_samples / header.sample_rate_hz
    try:
        with path.open("rb") as stream:
            fixed = stream.read(256)
            count = int(fixed[252:256].decode("ascii"))
            block = stream.read(256 * count)
        records, seconds = int(fixed[236:244].decode("ascii")), float(fixed[244:252].decode("ascii"))
        names = [block[16 * i : 16 * (i + 1)].decode("latin-1").strip() for i in range(count)]
        start = 216 * count
        samples = [int(block[start + 8 * i : start + 8 * (i + 1)].decode("ascii")) for i in range(count)]
    except (OSError, ValueError, UnicodeDecodeError) as error:
        raise UserError(
            f"subject {subject}: cannot read the recording {path}: not an EDF/BDF header ({error})"
        ) from None
    if len(block) != 256 * count or seconds <= 0:
        raise UserError(f"subject {subject}: cannot read the recording {path}: truncated or invalid EDF/BDF header")
    signals = {
        name: n / seconds for name, n in zip(names, samples) if name not in ("EDF Annotations", "BDF Annotations")
    }
    return signals, records * seconds


def _kept(signals: dict[str, float], table, recording: Path, subject: str) -> dict[str, float]:
    """The EEG signals not marked bad (all without a channels file), as `famwise.bids` keeps them."""
    if table is None:
        kept = signals
    else:
        left_out = bids.left_out_channels(table)
        names = [n for n in table if n not in left_out]
        missing = [n for n in names if n not in signals]
        if missing:
            raise UserError(
                f"subject {subject}: channels {missing} of the channels file are not in {recording}, which holds {list(signals)}"
            )
        kept = {n: signals[n] for n in names}
    if not kept:
        raise UserError(f"subject {subject}: no good EEG channel in {recording}")
    if len(set(kept.values())) > 1:
        raise UserError(
            f"subject {subject}: the EEG channels of {recording} have different sampling rates {sorted(set(kept.values()))} Hz"
        )
    return kept


def _events(path: Path, subject: str) -> list[tuple[float, str]]:
    """(onset s, trial_type) of every labelled event of an events file."""
    if not path.is_file():
        raise UserError(f"subject {subject}: events file {path} is missing")
    rows = bids.read_tsv(path)
    columns = list(rows[0]) if rows else []
    for column in ("onset", "trial_type"):
        if column not in columns:
            raise UserError(f"subject {subject}: events file {path} has no {column!r} column; found {columns}")
    events = []
    for line, row in enumerate(rows, start=2):
        if row["trial_type"] == "n/a":
            continue
        try:
            events.append((float(row["onset"]), row["trial_type"]))
        except ValueError:
            raise UserError(
                f"subject {subject}: events file {path}, line {line}: onset {row['onset']!r} is not a number"
            ) from None
    return events


def _first_beyond(
    events, wanted: set[str], window_ms, duration: float, sample_rate_hz: float, recording: Path
) -> str | None:
    """The first wanted event whose epoch window leaves the recording (in samples, as the epochs are cut)."""
    first_offset = int(round(window_ms[0] * sample_rate_hz / 1000.0))
    n_samples = int(round(window_ms[1] * sample_rate_hz / 1000.0)) - first_offset + 1
    n_total = int(round(duration * sample_rate_hz))
    for onset, label in events:
        first = int(round(onset * sample_rate_hz)) + first_offset
        if label in wanted and (first < 0 or first + n_samples > n_total):
            return f"the event at onset {onset:g} s ('{label}') in {recording} (recording 0 to {duration:g} s)"
    return None
