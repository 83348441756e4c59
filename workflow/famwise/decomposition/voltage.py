"""Voltage maps (no decomposition): each condition's mean epoch, baseline-subtracted, in microvolts.

The steps, each linear in the epochs: optional zero-phase low-pass
(Butterworth, `scipy.signal.sosfiltfilt`), optional time step through the
anti-aliasing decimator `scipy.signal.decimate` (FIR, zero phase; never plain
sub-sampling), the average over each condition's epochs, and the subtraction
of the baseline window's mean. With the plain mean the filters run on the
condition average (identical to filtering every epoch, by linearity, and
epochs-times faster); with the trimmed mean they run on every epoch first.

A voltage map keeps the time-frequency file's layout with a single frequency
entry of 0 Hz (``measure`` ``"voltage"``), so every later stage works on it
unchanged; the report shows no frequency for it.
"""

import numpy as np
import scipy.signal
from scipy.stats import trim_mean

from famwise.axes import VOLTAGE_FREQ_HZ
from famwise.decomposition.checks import check_finite, select_epochs
from famwise.decomposition.decompose import _output_samples, baseline_window
from famwise.decomposition.maps import TimeFreqMaps
from famwise.epochs import Epochs
from famwise.errors import UserError

LOWPASS_ORDER = 4
"""Order of the Butterworth low-pass; run forward and backward, its attenuation doubles (zero phase)."""
PAD_SAMPLES = 3 * (2 * (LOWPASS_ORDER // 2) + 1)
"""Samples `scipy.signal.sosfiltfilt` pads each end with (its default for the low-pass's second-order sections)."""
MICROVOLTS = 1e6
BASELINE_MODES = ("subtract", "none")
AVERAGES = ("mean", "trimmed")


def voltage_maps(
    epochs: Epochs,
    *,
    subject: str,
    conditions: dict[str, list[str]],
    time_step_ms: float | None = None,
    lowpass_hz: float | None = None,
    average: str = "mean",
    trim: float = 0.2,
    baseline_mode: str = "subtract",
    baseline_window_ms: tuple[float, float] | None = None,
    baseline_pooled: bool = False,
    min_epochs: int = 1,
) -> TimeFreqMaps:
    """Condition-wise mean voltage of one subject.

    Parameters
    ----------
    epochs : Epochs
        Data (n_epochs, n_channels, n_samples) in volts.
    subject : str
        Subject id, used in messages.
    conditions : dict of str to list of str
        Condition name -> the epoch labels pooled into it.
    time_step_ms : float, optional
        Output time step, a whole multiple q of the sample interval; the grid
        keeps the sample at 0 s when the epoch holds it. The signal from the
        grid's first sample on goes through ``scipy.signal.decimate(x, q,
        ftype="fir", zero_phase=True)``. None keeps every sample.
    lowpass_hz : float, optional
        Cut-off (Hz, below Nyquist) of a zero-phase Butterworth low-pass of
        order `LOWPASS_ORDER` run by `scipy.signal.sosfiltfilt`, applied
        before the time step.
    average : {"mean", "trimmed"}
        Mean over epochs, or `scipy.stats.trim_mean` cutting ``trim`` at each end.
    trim : float
        Proportion cut at each end for ``trimmed``, in [0, 0.5).
    baseline_mode : {"subtract", "none"}
        Subtract each channel's mean over the baseline window's output samples.
    baseline_window_ms : (float, float), optional
        Baseline window in ms, inside the epoch; needed for ``subtract``.
    baseline_pooled : bool
        Subtract the epoch-weighted mean baseline of all conditions instead of
        each condition's own.
    min_epochs : int
        Fewest epochs a condition may have.

    Returns
    -------
    TimeFreqMaps
        ``values`` (n_conditions, n_channels, 1, n_times) in microvolts,
        ``freqs`` ``[0.0]``, ``measure`` ``"voltage"``, ``valid`` all True.

    Raises
    ------
    UserError
        Naming the subject: bad options, a condition without enough epochs,
        NaN or infinite samples, a cut-off at or above Nyquist (before or
        after the time step), a baseline window without output samples.
    """
    _check_options(
        epochs,
        subject=subject,
        lowpass_hz=lowpass_hz,
        average=average,
        trim=trim,
        baseline_mode=baseline_mode,
        baseline_window_ms=baseline_window_ms,
        time_step_ms=time_step_ms,
    )
    members = select_epochs(epochs, subject=subject, conditions=conditions, min_epochs=min_epochs)
    check_finite(epochs, np.unique(np.concatenate(members)), subject=subject)
    keep = _output_samples(epochs, time_step_ms, subject=subject)
    times = epochs.times[keep]
    in_window = baseline_samples(times, epochs.times, baseline_mode, baseline_window_ms, subject=subject)
    means = []
    for index in members:
        if average == "mean":  # summed epoch by epoch in epoch order: no copy of the condition's epochs
            total = np.zeros(epochs.data.shape[1:])
            for epoch in index:
                total += epochs.data[epoch]
            means.append(_filtered(total / index.size, epochs.sample_rate_hz, keep, lowpass_hz))
        else:
            data = np.asarray(epochs.data[index], dtype=float)
            means.append(trim_mean(_filtered(data, epochs.sample_rate_hz, keep, lowpass_hz), trim, axis=0))
    values = np.stack(means) * MICROVOLTS  # (n_conditions, n_channels, n_times)
    n_epochs = np.array([m.size for m in members], dtype=np.int64)
    if baseline_mode == "subtract":
        offset = values[..., in_window].mean(axis=-1, keepdims=True)
        if baseline_pooled:
            offset = np.tensordot(n_epochs / n_epochs.sum(), offset, axes=1)[None]
        values = values - offset
    return TimeFreqMaps(
        values=values[:, :, None, :].astype(np.float32),
        conditions=tuple(conditions),
        channels=tuple(epochs.channels),
        freqs=np.array([VOLTAGE_FREQ_HZ]),
        times=times,
        measure="voltage",
        baseline=describe(baseline_mode, baseline_window_ms, pooled=baseline_pooled),
        n_epochs=n_epochs,
        valid=np.ones((1, times.size), dtype=bool),
    )


def describe(mode: str, window_ms: tuple[float, float] | None, *, pooled: bool) -> str:
    """One line for the maps' ``baseline``, e.g. ``"mean from -200 to 0 ms subtracted, per condition"``."""
    if mode == "none":
        return "none"
    scope = "pooled over conditions" if pooled else "per condition"
    return f"mean from {window_ms[0]:g} to {window_ms[1]:g} ms subtracted, {scope}"


def _filtered(data: np.ndarray, sample_rate_hz: float, keep: slice, lowpass_hz: float | None) -> np.ndarray:
    """Low-pass, then the time step, along the last axis (samples)."""
    if lowpass_hz is not None:
        sos = scipy.signal.butter(LOWPASS_ORDER, lowpass_hz, btype="low", fs=sample_rate_hz, output="sos")
        data = scipy.signal.sosfiltfilt(sos, data, axis=-1)
    if keep.step == 1:
        return data[..., keep]
    n_out = len(range(*keep.indices(data.shape[-1])))
    out = scipy.signal.decimate(data[..., keep.start :], keep.step, ftype="fir", zero_phase=True, axis=-1)
    return out[..., :n_out]


def _check_options(
    epochs, *, subject, lowpass_hz, average, trim, baseline_mode, baseline_window_ms, time_step_ms
) -> None:
    """Raise UserError for settings that cannot work, before any computation."""
    who = f"subject {subject}:"
    for setting, value, allowed in (("average", average, AVERAGES), ("baseline mode", baseline_mode, BASELINE_MODES)):
        if value not in allowed:
            raise UserError(f"{who} voltage maps take {setting} one of {list(allowed)}, got {value!r}")
    if average == "trimmed" and not 0 <= trim < 0.5:
        raise UserError(f"{who} trim must be in [0, 0.5), got {trim!r}")
    if baseline_mode == "subtract" and baseline_window_ms is None:
        raise UserError(f"{who} baseline mode 'subtract' needs a baseline window (ms)")
    check_filters(epochs, subject=subject, lowpass_hz=lowpass_hz, time_step_ms=time_step_ms)


def check_filters(epochs, *, subject: str, lowpass_hz: float | None, time_step_ms: float | None) -> None:
    """Raise UserError naming the subject when the low-pass cannot run on its epochs.

    The cut-off (Hz) must lie below the Nyquist frequency of the data and of the
    time step, and `scipy.signal.sosfiltfilt` needs more than `PAD_SAMPLES`
    samples per epoch. ``epochs`` needs ``sample_rate_hz`` and ``data`` (its last axis: samples).
    """
    if lowpass_hz is None:
        return
    who = f"subject {subject}:"
    nyquist = epochs.sample_rate_hz / 2.0
    if not 0 < lowpass_hz < nyquist:
        raise UserError(
            f"{who} lowpass_hz must lie between 0 and the Nyquist frequency {nyquist:g} Hz, got {lowpass_hz:g}"
        )
    if time_step_ms is not None and lowpass_hz >= 500.0 / time_step_ms:
        raise UserError(
            f"{who} lowpass_hz {lowpass_hz:g} Hz is at or above the Nyquist frequency "
            f"{500.0 / time_step_ms:g} Hz of the {time_step_ms:g} ms time step"
        )
    if epochs.data.shape[-1] <= PAD_SAMPLES:
        raise UserError(
            f"{who} the zero-phase low-pass needs epochs of more than {PAD_SAMPLES} samples, "
            f"got {epochs.data.shape[-1]}"
        )


def baseline_samples(times, all_times, mode, window_ms, *, subject) -> np.ndarray:
    """Output samples inside the baseline window (all False without a baseline).

    ``times`` (output grid) and ``all_times`` (every sample) in s; ``window_ms`` [start, end] in ms.
    """
    if mode == "none":
        return np.zeros(times.size, dtype=bool)
    inside = baseline_window(times, all_times, window_ms, subject=subject)
    if not inside.any():
        start, stop = window_ms
        raise UserError(f"subject {subject}: baseline window {start:g} to {stop:g} ms holds no output time point")
    return inside
