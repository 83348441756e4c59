"""Condition-wise time-frequency maps of one subject and their file."""

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.axes import is_voltage
from famwise.errors import UserError

_KEYS = ("values", "conditions", "channels", "freqs", "times", "measure", "baseline", "n_epochs")


@dataclass(frozen=True)
class TimeFreqMaps:
    """Time-frequency maps of one subject, one per condition.

    Attributes
    ----------
    values : ndarray of float32, shape (n_conditions, n_channels, n_freqs, n_times)
        The measure: power (V^2 for Morlet, V^2/Hz for multitaper), ITPC, or
        voltage (microvolts, one frequency entry of 0 Hz), after the baseline
        (see ``baseline``).
    conditions : tuple of str, length n_conditions
    channels : tuple of str, length n_channels
    freqs : ndarray, shape (n_freqs,)
        Frequencies in Hz (``[0.0]`` for voltage).
    times : ndarray, shape (n_times,)
        Times in s relative to the event.
    measure : str
        ``"power"``, ``"induced"``, ``"itpc"`` or ``"voltage"``.
    baseline : str
        How values were normalised, e.g. ``"dB change from -400 to -100 ms, per condition"``.
    n_epochs : ndarray of int, shape (n_conditions,)
        Epochs averaged per condition.
    valid : ndarray of bool, shape (n_freqs, n_times)
        False where the wavelet or taper reaches outside the epoch (cone of
        influence); those cells must not enter the analysis.
    """

    values: np.ndarray
    conditions: tuple[str, ...]
    channels: tuple[str, ...]
    freqs: np.ndarray
    times: np.ndarray
    measure: str
    baseline: str
    n_epochs: np.ndarray
    valid: np.ndarray

    def save(self, path: Path | str) -> None:
        """Write the maps as an NPZ file, atomically (temporary file, then rename).

        Parameters
        ----------
        path : Path or str
            Target file; its folder must exist.
        """
        path = Path(path)
        save_npz(
            path,
            values=np.asarray(self.values, dtype=np.float32),
            conditions=np.array(self.conditions, dtype=str),
            channels=np.array(self.channels, dtype=str),
            freqs=np.asarray(self.freqs, dtype=float),
            times=np.asarray(self.times, dtype=float),
            measure=np.array(self.measure),
            baseline=np.array(self.baseline),
            n_epochs=np.asarray(self.n_epochs, dtype=np.int64),
            valid=np.asarray(self.valid, dtype=bool),
        )

    def valid_span_ms(self, fmin_hz: float, fmax_hz: float) -> tuple[float, float] | None:
        """The widest time window (ms) valid at every frequency in [fmin_hz, fmax_hz].

        Returns None when no time point is valid at all those frequencies.
        Useful to say which analysis window would fit the cone of influence.
        """
        rows = (self.freqs >= fmin_hz) & (self.freqs <= fmax_hz)
        ok = self.valid[rows].all(axis=0)
        if not ok.any():
            return None
        idx = np.flatnonzero(ok)
        return (round(float(self.times[idx[0]]) * 1000.0, 6), round(float(self.times[idx[-1]]) * 1000.0, 6))


def load_maps(path: Path | str) -> TimeFreqMaps:
    """Read a time-frequency file written by `TimeFreqMaps.save` (or by a user).

    ``valid`` may be absent (all cells valid then). Every other key of the
    time-frequency file contract is required.

    Parameters
    ----------
    path : Path or str

    Returns
    -------
    TimeFreqMaps

    Raises
    ------
    UserError
        Naming the file, when it is missing, unreadable, lacks a key or holds
        arrays of inconsistent shapes.
    """
    path = Path(path)
    if not path.is_file():
        raise UserError(f"time-frequency file {path} does not exist")
    try:
        with np.load(path, allow_pickle=False) as npz:
            found = {key: npz[key] for key in npz.files}
    except Exception as exc:
        raise UserError(f"time-frequency file {path} is not a readable NPZ file ({exc})") from None
    missing = [key for key in _KEYS if key not in found]
    if missing:
        raise UserError(
            f"time-frequency file {path} lacks the keys {missing}; expected {list(_KEYS)}, found {sorted(found)}"
        )
    values = found["values"]
    if values.ndim != 4 or not np.issubdtype(values.dtype, np.floating):
        raise UserError(
            f"time-frequency file {path}: 'values' must be a float array "
            f"(n_conditions, n_channels, n_freqs, n_times), found {values.dtype} "
            f"with shape {values.shape}"
        )
    n_cond, n_chan, n_freq, n_time = values.shape
    expected = {"conditions": n_cond, "channels": n_chan, "freqs": n_freq, "times": n_time, "n_epochs": n_cond}
    for key, length in expected.items():
        if found[key].shape != (length,):
            raise UserError(
                f"time-frequency file {path}: '{key}' must have shape ({length},) "
                f"to match 'values' {values.shape}, found {found[key].shape}"
            )
    valid = found.get("valid", np.ones((n_freq, n_time), dtype=bool))
    if valid.shape != (n_freq, n_time):
        raise UserError(
            f"time-frequency file {path}: 'valid' must have shape ({n_freq}, {n_time}), found {valid.shape}"
        )
    freqs = found["freqs"].astype(float)
    if str(found["measure"]) == "voltage":
        if not is_voltage(freqs):
            raise UserError(
                f"time-frequency file {path}: voltage maps have the single frequency entry 0, found {freqs}"
            )
    elif np.any(freqs <= 0) or np.any(np.diff(freqs) <= 0):
        raise UserError(f"time-frequency file {path}: 'freqs' must be positive and increasing, found {freqs}")
    if not np.all(np.isfinite(values)):
        raise UserError(f"time-frequency file {path}: 'values' holds NaN or infinite entries")
    return TimeFreqMaps(
        values=values.astype(np.float32),
        conditions=tuple(str(c) for c in found["conditions"]),
        channels=tuple(str(c) for c in found["channels"]),
        freqs=freqs,
        times=found["times"].astype(float),
        measure=str(found["measure"]),
        baseline=str(found["baseline"]),
        n_epochs=found["n_epochs"].astype(np.int64),
        valid=valid.astype(bool),
    )
