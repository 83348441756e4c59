"""Recording files of the formats famwise reads: EDF, BDF (through edfio) and `.vhdr` (``.vhdr``).

Every format is opened into one `Recording`: its signals' names, rates and
units, and their samples in those units. The BIDS reader then applies one set
of rules (channels kept, units, epochs) to all of them.
"""

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import NamedTuple

import edfio
import numpy as np

from famwise import vhdr
from famwise.errors import UserError

SUFFIXES = (".edf", ".bdf", ".vhdr")
FORMATS = ("edf", "bdf", "vhdr")
_EDF_DIGITAL = {"edf": (32767, np.int16), "bdf": (8388607, np.int32)}  # largest stored value, sample type


class Signal(NamedTuple):
    """One signal of a recording: label, sampling rate in Hz, unit as the file states it."""

    label: str
    sample_rate_hz: float
    unit: str


@dataclass(frozen=True)
class Recording:
    """A recording file opened for reading.

    Attributes
    ----------
    path : Path
    signals : tuple of Signal
    duration_s : float
        Length of the recording in s.
    """

    path: Path
    signals: tuple[Signal, ...]
    duration_s: float
    _load: Callable[[list[int]], np.ndarray]

    def read(self, labels: list[str]) -> np.ndarray:
        """Samples of the named signals, shape (len(labels), n_samples), each in its signal's unit."""
        order = [signal.label for signal in self.signals]
        return self._load([order.index(label) for label in labels])


def open_recording(path: Path, subject: str, *, headers_only: bool = False) -> Recording:
    """Open an EDF, BDF or `.vhdr` recording (chosen by suffix).

    Parameters
    ----------
    path : Path
    subject : str
        Subject id, named in errors.
    headers_only : bool
        Do not load EDF samples now (``read`` loads them from disk when asked; edfio
        reads BDF files whole).

    Raises
    ------
    UserError
        Naming the subject and the file that cannot be read.
    """
    path = Path(path)
    try:
        if path.suffix.lower() == ".vhdr":
            header = vhdr.read_header(path)
            return Recording(
                path,
                tuple(Signal(c.name, header.sample_rate_hz, c.unit) for c in header.channels),
                header.n_samples / header.sample_rate_hz,
                lambda indices: vhdr.read_samples(header, indices),
            )
        if path.suffix.lower() == ".bdf":
            edf = edfio.read_bdf(path)
        else:
            edf = edfio.read_edf(path, lazy_load_data=True if headers_only else "auto")
    except UserError as exc:
        raise UserError(f"subject {subject}: {exc}") from None
    except Exception as exc:
        raise UserError(f"subject {subject}: cannot read the recording {path}: {exc}") from None
    signals = edf.signals
    return Recording(
        path,
        tuple(Signal(s.label, s.sampling_frequency, s.physical_dimension) for s in signals),
        edf.duration,
        lambda indices: np.stack([signals[i].data for i in indices]),
    )


def write_recording(
    path: Path,
    data_uv: np.ndarray,
    *,
    sample_rate_hz: float,
    channels: list[str],
    fmt: str,
    markers: list[tuple[int, str]],
    resolution_uv: float | None = None,
) -> Path:
    """Write a continuous recording in µV as EDF, BDF or `.vhdr`; return the file written.

    Parameters
    ----------
    path : Path
        File name without suffix (``.../sub-01_task-x_eeg``).
    data_uv : ndarray, shape (n_channels, n_samples)
        Samples in µV.
    sample_rate_hz : float
        Sampling rate in Hz.
    channels : list of str
    fmt : {"edf", "bdf", "vhdr"}
    markers : list of (sample, description)
        Stimulus markers, written to the `.vmrk` marker file only.
    resolution_uv : float, optional
        Store whole multiples of this step with zero offset in every format:
        the same integer samples then read back as the same values (exactly,
        for a power of two). None: EDF/BDF scale each channel over its range
        (16 or 24 bit), `.vhdr` stores 32-bit floats.
        EDF/BDF recordings are padded with their last sample to whole 1-s
        data records.
    """
    if fmt == "vhdr":
        target = Path(f"{path}.vhdr")
        vhdr.write(
            target, data_uv, sample_rate_hz=sample_rate_hz, channels=channels, markers=markers, resolution=resolution_uv
        )
        return target
    target = Path(f"{path}.{fmt}")
    signal_class, file_class = (edfio.EdfSignal, edfio.Edf) if fmt == "edf" else (edfio.BdfSignal, edfio.Bdf)
    record = int(round(sample_rate_hz)) if float(sample_rate_hz).is_integer() else data_uv.shape[1]
    padded = np.pad(data_uv, ((0, 0), (0, -data_uv.shape[1] % record)), mode="edge")
    if resolution_uv is None:
        signals = [
            signal_class(row, sample_rate_hz, label=name, physical_dimension="uV")
            for row, name in zip(padded, channels)
        ]
    else:
        limit, dtype = _EDF_DIGITAL[fmt]
        bound = float(np.floor(limit * resolution_uv))
        steps = int(round(bound / resolution_uv))
        digital = np.round(padded / resolution_uv)
        if bound <= 0 or np.abs(digital).max() > steps:
            raise ValueError(f"samples beyond ±{bound:g} µV cannot be stored at {resolution_uv:g} µV per step")
        signals = [
            signal_class.from_digital(
                row.astype(dtype),
                sample_rate_hz,
                label=name,
                physical_dimension="uV",
                physical_range=(-bound, bound),
                digital_range=(-steps, steps),
            )
            for row, name in zip(digital, channels)
        ]
    file_class(signals).write(target)
    return target
