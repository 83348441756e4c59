"""Reading subject inputs and writing results atomically.

Epochs NPZ (``subjects.source: epochs``): keys ``data`` float (n_epochs,
n_channels, n_times) in volts, ``sample_rate_hz`` (Hz), ``epoch_start_s`` (s), ``channels``
(str, n_channels), ``event_labels`` (str, n_epochs: the event label of each
epoch), optional ``bad`` bool (n_epochs).
"""

import re
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.epochs import Epochs
from famwise.errors import UserError


def save_epochs(
    path: str | Path,
    data: np.ndarray,
    *,
    sample_rate_hz: float,
    epoch_start_s: float,
    channels: Sequence[str],
    event_labels: Sequence[str],
    bad: np.ndarray | None = None,
) -> None:
    """Write one subject's epochs in famwise's epochs NPZ format.

    Parameters
    ----------
    path : path
        Output file, e.g. ``data/sub-01.npz``.
    data : ndarray, shape (n_epochs, n_channels, n_times)
        Samples in volts.
    sample_rate_hz : float
        Sampling rate in Hz.
    epoch_start_s : float
        Time of the first sample relative to the event, in s.
    channels : sequence of str, length n_channels
        Channel names.
    event_labels : sequence of str, length n_epochs
        Event label of each epoch.
    bad : ndarray of bool, shape (n_epochs,), optional
        Epochs to leave out.
    """
    data = np.asarray(data)
    channels = [str(c) for c in channels]
    event_labels = [str(c) for c in event_labels]
    if data.ndim != 3:
        raise ValueError(f"data must have shape (n_epochs, n_channels, n_times), got {data.shape}")
    if len(channels) != data.shape[1]:
        raise ValueError(f"{len(channels)} channel names for {data.shape[1]} channels")
    if len(event_labels) != data.shape[0]:
        raise ValueError(f"{len(event_labels)} condition labels for {data.shape[0]} epochs")
    if sample_rate_hz <= 0:
        raise ValueError(f"sample_rate_hz must be positive, got {sample_rate_hz}")
    arrays = dict(
        data=data,
        sample_rate_hz=float(sample_rate_hz),
        epoch_start_s=float(epoch_start_s),
        channels=np.array(channels),
        event_labels=np.array(event_labels),
    )
    if bad is not None:
        bad = np.asarray(bad, dtype=bool)
        if bad.shape != (data.shape[0],):
            raise ValueError(f"bad must have shape ({data.shape[0]},), got {bad.shape}")
        arrays["bad"] = bad
    save_npz(Path(path), **arrays)


def load_epochs(path: Path, *, subject: str) -> Epochs:
    """Read an epochs NPZ, checking every key, shape and value.

    Raises
    ------
    UserError
        Naming the subject and the file for a missing file, missing key,
        wrong shape or non-finite samples.
    """
    path = Path(path)
    where = f"subject {subject} ({path})"
    if not path.is_file():
        raise UserError(f"{where}: epochs file not found")
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError) as error:
        raise UserError(f"{where}: not a readable NPZ file ({error})") from None
    with archive:
        missing = [
            key
            for key in ("data", "sample_rate_hz", "epoch_start_s", "channels", "event_labels")
            if key not in archive.files
        ]
        if missing:
            raise UserError(
                f"{where}: missing key(s) {', '.join(missing)} (an epochs file has data, sample_rate_hz, epoch_start_s, channels, event_labels)"
            )
        data = archive["data"]
        sample_rate_hz = float(archive["sample_rate_hz"])
        epoch_start_s = float(archive["epoch_start_s"])
        channels = tuple(str(c) for c in archive["channels"])
        labels = np.array([str(c) for c in archive["event_labels"]])
        bad = archive["bad"].astype(bool) if "bad" in archive.files else None
    if data.ndim != 3:
        raise UserError(f"{where}: data must have shape (n_epochs, n_channels, n_times), got {data.shape}")
    if len(channels) != data.shape[1]:
        raise UserError(f"{where}: {len(channels)} channel names for {data.shape[1]} channels in data")
    if labels.shape != (data.shape[0],):
        raise UserError(f"{where}: {labels.size} condition labels for {data.shape[0]} epochs")
    if not sample_rate_hz > 0:
        raise UserError(f"{where}: sample_rate_hz must be positive, got {sample_rate_hz}")
    finite = np.isfinite(data)
    if not finite.all():
        epoch, channel, _ = np.argwhere(~finite)[0]
        raise UserError(f"{where}: NaN or inf samples (first in epoch {epoch}, channel {channels[channel]})")
    if bad is not None:
        data, labels = data[~bad], labels[~bad]
    return Epochs(
        data=data.astype(np.float64, copy=False),
        sample_rate_hz=sample_rate_hz,
        epoch_start_s=epoch_start_s,
        channels=channels,
        labels=labels,
    )


def subject_file(folder: Path, pattern: str, subject: str) -> Path:
    """The input file of one subject from a spec pattern such as ``data/sub-{subject}.npz``."""
    return (folder / pattern.replace("{subject}", subject)).resolve()


def discover_pattern(folder: Path, pattern: str) -> list[str]:
    """Subject ids whose files match a ``{subject}`` pattern (relative to ``folder``, or absolute), sorted."""
    anchor = Path(pattern).anchor
    if anchor:
        folder, pattern = Path(anchor), pattern[len(anchor) :]
    before, _, after = pattern.partition("{subject}")
    glob = before + "*" + after
    regex = re.compile(re.escape(before) + r"([A-Za-z0-9]+)" + re.escape(after) + "$")
    found = []
    for candidate in sorted(folder.glob(glob)):
        match = regex.search(candidate.relative_to(folder).as_posix())
        if match:
            found.append(match.group(1))
    return found
