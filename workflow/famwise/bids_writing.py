"""Writing BIDS-EEG folders: one subject's recording with its sidecars, and participants.tsv.

Used by the example study (`famwise.demo`) and by tests; `famwise.bids` reads what this writes.
"""

import csv
import json
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from famwise.bids import _strip_sub
from famwise.errors import UserError
from famwise.recordings import FORMATS, write_recording

BIDS_VERSION = "1.9.0"


def write_subject(
    root: Path,
    subject: str,
    *,
    data: np.ndarray,
    sample_rate_hz: float,
    channels: list[str],
    events: list[tuple[float, float, str]],
    task: str,
    bad_channels: Sequence[str] = (),
    electrodes: dict[str, tuple[float, float, float]] | None = None,
    fmt: str = "edf",
    run: int | None = None,
    resolution_uv: float | None = None,
) -> None:
    """Write one subject's continuous recording as BIDS-EEG.

    Parameters
    ----------
    root : Path
        The BIDS folder (created if needed).
    subject : str
        Subject id without ``sub-``.
    data : ndarray, shape (n_channels, n_samples)
        Samples in volts, stored in µV as `famwise.recordings.write_recording`
        describes (EDF/BDF: 16 or 24 bit over each channel's range, padded with
        the last sample to whole 1-s data records; `.vhdr`: 32-bit floats).
    sample_rate_hz : float
        Sampling rate in Hz.
    channels : list of str
        Channel names (at most 16 characters).
    events : list of (onset s, duration s, trial_type)
    task : str
        Task label.
    bad_channels : sequence of str
        Channels written with status "bad" in ``_channels.tsv``.
    electrodes : dict of str to (x, y, z), optional
        Electrode positions in mm, written to ``_electrodes.tsv`` with a
        ``_coordsystem.json``.
    fmt : {"edf", "bdf", "vhdr"}
    run : int, optional
        Run number (``_run-<n>`` in the file names) for a subject recorded in several runs.
    resolution_uv : float, optional
        Store whole multiples of this step (µV) in any format, so that the
        formats hold the same integer samples.
    """
    data = np.asarray(data, dtype=float)
    if data.ndim != 2 or data.shape[0] != len(channels):
        raise UserError(
            f"subject {subject}: data must have shape (n_channels={len(channels)}, n_samples), got {data.shape}"
        )
    if fmt not in FORMATS:
        raise UserError(f"subject {subject}: format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    folder = Path(root) / f"sub-{subject}" / "eeg"
    folder.mkdir(parents=True, exist_ok=True)
    stem = folder / (f"sub-{subject}_task-{task}" + (f"_run-{run}" if run is not None else ""))

    markers = [(int(round(onset * sample_rate_hz)), label) for onset, _, label in events]
    try:
        write_recording(
            Path(f"{stem}_eeg"),
            data * 1e6,
            sample_rate_hz=sample_rate_hz,
            channels=channels,
            fmt=fmt,
            markers=markers,
            resolution_uv=resolution_uv,
        )
    except ValueError as exc:
        suffix = "vhdr" if fmt == "vhdr" else fmt
        raise UserError(f"subject {subject}: cannot write {stem}_eeg.{suffix}: {exc}") from None

    _write_tsv(
        Path(f"{stem}_events.tsv"),
        ["onset", "duration", "trial_type", "sample"],
        [[f"{on:.6f}", f"{dur:.6f}", label, str(int(round(on * sample_rate_hz)))] for on, dur, label in events],
    )
    _write_tsv(
        Path(f"{stem}_channels.tsv"),
        ["name", "type", "units", "status"],
        [[name, "EEG", "uV", "bad" if name in set(bad_channels) else "good"] for name in channels],
    )
    Path(f"{stem}_eeg.json").write_text(
        json.dumps(
            {
                "TaskName": task,
                "SamplingFrequency": sample_rate_hz,
                "EEGReference": "n/a",
                "PowerLineFrequency": "n/a",
                "SoftwareFilters": "n/a",
                "EEGChannelCount": len(channels),
            },
            indent=2,
        )
        + "\n"
    )
    if electrodes is not None:
        base = folder / f"sub-{subject}"
        _write_tsv(
            Path(f"{base}_electrodes.tsv"),
            ["name", "x", "y", "z"],
            [[name, *(f"{v:.4f}" for v in xyz)] for name, xyz in electrodes.items()],
        )
        Path(f"{base}_coordsystem.json").write_text(
            json.dumps(
                {
                    "EEGCoordinateSystem": "Other",
                    "EEGCoordinateUnits": "mm",
                    "EEGCoordinateSystemDescription": "head-centred, x right, y front, z up",
                },
                indent=2,
            )
            + "\n"
        )


def write_participants(root: Path, rows: list[dict[str, str]]) -> None:
    """Write ``participants.tsv`` (and ``dataset_description.json`` if absent).

    Parameters
    ----------
    root : Path
        The BIDS folder (created if needed).
    rows : list of dict
        One per subject; ``participant_id`` (with or without ``sub-``) is
        required, other columns are free (missing values become "n/a").
    """
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    columns = ["participant_id"]
    for row in rows:
        if "participant_id" not in row:
            raise UserError(f"every participants row needs a 'participant_id', got {row}")
        columns += [key for key in row if key not in columns]
    lines = [
        [f"sub-{_strip_sub(str(row['participant_id']))}"] + [str(row.get(key, "n/a")) for key in columns[1:]]
        for row in rows
    ]
    _write_tsv(root / "participants.tsv", columns, lines)
    description = root / "dataset_description.json"
    if not description.exists():
        description.write_text(
            json.dumps({"Name": root.name, "BIDSVersion": BIDS_VERSION, "DatasetType": "raw"}, indent=2) + "\n"
        )


def _write_tsv(path: Path, header: list[str], rows: list[list[str]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as stream:
        writer = csv.writer(stream, delimiter="\t", lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)
