"""Per-subject time-frequency decomposition: epochs in, condition-wise maps out.

The convolution runs channel by channel over all epochs of the channel at
once (one forward FFT per channel and FFT length, one inverse FFT per kernel),
frequencies in blocks sized to a memory budget, so complex coefficients are
never held for all channels x frequencies x epochs. Products and inverse FFTs
run in single precision (complex64; error about 1e-6 relative to the
largest coefficient), spectra and averages in double precision.
"""

import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.fft
from scipy.stats import trim_mean

from famwise.decomposition import baseline as _baseline
from famwise.decomposition import multitaper as _mt
from famwise.decomposition import wavelets as _wl
from famwise.decomposition.checks import check_finite, check_options, select_epochs
from famwise.decomposition.maps import TimeFreqMaps
from famwise.epochs import Epochs
from famwise.errors import FamwiseWarning, UserError
from famwise.kernels.tf_power import _add_epoch_power, _add_mean_power

SPACINGS = ("linear", "log")
BLOCK_BYTES = 64 * 2**20
"""Budget in bytes for the complex64 coefficients of one frequency block and taper."""


def frequency_grid(lowest_hz: float, highest_hz: float, count: int, spacing: str = "log") -> np.ndarray:
    """Analysis frequencies from ``lowest_hz`` to ``highest_hz`` inclusive.

    Parameters
    ----------
    lowest_hz, highest_hz : float
        Lowest and highest frequency in Hz, 0 < lowest_hz < highest_hz (equal when count is 1).
    count : int
        Number of frequencies, at least 1.
    spacing : {"linear", "log"}
        Equal steps in Hz, or in log frequency.

    Returns
    -------
    ndarray, shape (count,)
        Frequencies in Hz, increasing.
    """
    if spacing not in SPACINGS:
        raise UserError(f"frequency spacing must be one of {list(SPACINGS)}, got {spacing!r}")
    if int(count) != count or count < 1:
        raise UserError(f"the number of frequencies must be a whole number of at least 1, got {count}")
    if not 0 < lowest_hz <= highest_hz or (count > 1 and lowest_hz == highest_hz):
        raise UserError(
            f"frequencies must satisfy 0 < start < stop, got start {lowest_hz:g} Hz and stop {highest_hz:g} Hz"
        )
    if spacing == "log":
        return np.geomspace(lowest_hz, highest_hz, int(count))
    return np.linspace(lowest_hz, highest_hz, int(count))


@dataclass(frozen=True)
class _Kernels:
    """Convolution kernels of every frequency and what the edges cost."""

    kernels: list[np.ndarray]  # per frequency, complex (n_tapers, n_taps), odd n_taps
    halfwidth_s: np.ndarray  # (n_freqs,) cone of influence on each side
    scale: float  # |coefficient|^2 -> power unit
    name: str  # "Morlet wavelet" or "multitaper window"


def decompose(
    epochs: Epochs,
    *,
    subject: str,
    conditions: dict[str, list[str]],
    frequencies_hz: np.ndarray,
    method: str = "morlet",
    cycles: float | tuple[float, float] | None = None,
    fwhm_ms: float | tuple[float, float] | None = None,
    taper_length_ms: float | None = None,
    nw: float | None = None,
    measure: str = "power",
    time_step_ms: float | None = None,
    average: str = "mean",
    trim: float = 0.2,
    baseline_mode: str = "none",
    baseline_window_ms: tuple[float, float] | None = None,
    baseline_pooled: bool = False,
    baseline_single_epoch: bool = False,
    min_epochs: int = 1,
    progress: Callable[[str], None] | None = None,
) -> TimeFreqMaps:
    """Condition-wise time-frequency maps of one subject.

    Parameters
    ----------
    epochs : Epochs
        Data (n_epochs, n_channels, n_samples) in volts.
    subject : str
        Subject id, used in messages.
    conditions : dict of str to list of str
        Condition name -> the epoch labels that belong to it.
    frequencies_hz : ndarray, shape (n_freqs,)
        Increasing frequencies in Hz, below Nyquist.
    method : {"morlet", "multitaper"}
    cycles : float or (float, float), optional
        Morlet cycles: one number, or (at the lowest, at the highest frequency)
        growing log-linearly with frequency (`wavelets.log_linear`).
    fwhm_ms : float or (float, float), optional
        Morlet temporal FWHM in ms instead of cycles (Cohen 2019); a pair is
        interpolated like ``cycles``. Give exactly one of the two.
    taper_length_ms, nw : float, optional
        Multitaper taper length in ms (made odd in samples) and
        time-half-bandwidth product NW >= 1; K = 2 NW - 1 DPSS tapers.
    measure : {"power", "induced", "itpc"}
        Total power; induced power (each condition's average coefficient, i.e.
        its evoked response, removed from every epoch first); inter-trial
        phase coherence (Morlet only).
    time_step_ms : float, optional
        Output time step, a multiple of the sample interval; the grid keeps
        the sample at 0 s when the epoch contains it. None keeps every sample.
    average : {"mean", "trimmed"}
        Average over epochs; ``trimmed`` cuts ``trim`` of the epochs at each
        end per cell (`scipy.stats.trim_mean`).
    trim : float
        Proportion cut at each end for ``trimmed``, in [0, 0.5).
    baseline_mode : {"db", "percent", "zscore", "ratio", "none"}
        See `famwise.decomposition.baseline`. Must be "none" for ITPC.
    baseline_window_ms : (float, float), optional
        Baseline window in ms, inside the epoch, on the output grid.
    baseline_pooled : bool
        Baseline from the epoch-weighted average of all conditions instead of
        each condition's own.
    baseline_single_epoch : bool
        Normalise each epoch's power by its own baseline before averaging.
    min_epochs : int
        Fewest epochs a condition may have.
    progress : callable, optional
        Called with a short message after each channel.

    Returns
    -------
    TimeFreqMaps
        Morlet power in V^2 (a sinusoid of amplitude A gives A^2), multitaper
        power as one-sided PSD in V^2/Hz; ``valid`` marks cells farther than
        sqrt(2) sigma_t (Morlet) or half the window (multitaper) from both
        epoch edges.

    Raises
    ------
    UserError
        Naming the subject: bad options, a condition without epochs or with
        fewer than ``min_epochs``, NaN or infinite samples, a baseline window
        outside the epoch, wavelets or windows longer than the epoch.

    References
    ----------
    Torrence C, Compo GP (1998). Bull Am Meteorol Soc 79(1):61-78.
    Cohen MX (2019). NeuroImage 199:81-86.
    Thomson DJ (1982). Proc IEEE 70(9):1055-1096.
    """
    freqs = np.asarray(frequencies_hz, dtype=float)
    check_options(
        epochs,
        subject=subject,
        freqs=freqs,
        method=method,
        cycles=cycles,
        fwhm_ms=fwhm_ms,
        taper_length_ms=taper_length_ms,
        nw=nw,
        measure=measure,
        average=average,
        trim=trim,
        baseline_mode=baseline_mode,
        baseline_window_ms=baseline_window_ms,
        baseline_pooled=baseline_pooled,
        baseline_single_epoch=baseline_single_epoch,
        conditions=conditions,
    )
    members = select_epochs(epochs, subject=subject, conditions=conditions, min_epochs=min_epochs)
    check_finite(epochs, np.unique(np.concatenate(members)), subject=subject)
    kernels = _build_kernels(
        freqs,
        epochs.sample_rate_hz,
        method=method,
        cycles=cycles,
        fwhm_ms=fwhm_ms,
        taper_length_ms=taper_length_ms,
        nw=nw,
    )
    keep = _output_samples(epochs, time_step_ms, subject=subject)
    all_times = epochs.times
    times = all_times[keep]
    valid = _cone_of_influence(kernels, all_times, times)
    _check_fits(kernels, freqs, valid, all_times, subject=subject)
    in_window = _baseline_points(times, all_times, valid, freqs, baseline_mode, baseline_window_ms, subject=subject)

    # each condition's epochs in one run of rows (an epoch in two conditions appears twice)
    order = np.concatenate(members)
    ends = np.cumsum([m.size for m in members])
    spans = [slice(int(end - m.size), int(end)) for end, m in zip(ends, members)]
    raw = np.empty((len(members), len(epochs.channels), freqs.size, times.size))
    blocks = _frequency_blocks(kernels, epochs.data.shape[-1], order.size)
    for ch, name in enumerate(epochs.channels):
        signal = np.asarray(epochs.data[order, ch, :], dtype=float)
        spectra: dict[int, np.ndarray] = {}
        for rows, n_fft, kernel_fft in blocks:
            if n_fft not in spectra:
                spectra[n_fft] = scipy.fft.fft(signal, n=n_fft, axis=-1).astype(np.complex64)
            raw[:, ch, rows] = _block_measure(
                spectra[n_fft],
                kernel_fft,
                keep,
                spans,
                scale=kernels.scale,
                measure=measure,
                average=average,
                trim=trim,
                single_epoch_mode=baseline_mode if baseline_single_epoch else "none",
                in_window=in_window,
            )
        if progress is not None:
            progress(f"subject {subject}: channel {ch + 1}/{len(epochs.channels)} ({name}) done")

    if baseline_mode != "none" and not baseline_single_epoch:
        raw = _apply_baseline(
            raw, np.array([m.size for m in members]), in_window, mode=baseline_mode, pooled=baseline_pooled
        )
    return TimeFreqMaps(
        values=raw.astype(np.float32),
        conditions=tuple(conditions),
        channels=tuple(epochs.channels),
        freqs=freqs,
        times=times,
        measure=measure,
        baseline=_baseline.describe(
            baseline_mode, baseline_window_ms, pooled=baseline_pooled, single_epoch=baseline_single_epoch
        ),
        n_epochs=np.array([m.size for m in members], dtype=np.int64),
        valid=valid,
    )


def _build_kernels(freqs, sample_rate_hz, *, method, cycles, fwhm_ms, taper_length_ms, nw) -> _Kernels:
    """Wavelets or tapered kernels for every frequency."""
    if method == "morlet":
        if cycles is not None:
            sigma = _wl.sigma_t_from_cycles(freqs, _wl.log_linear(freqs, cycles))
        else:
            sigma = _wl.sigma_from_fwhm(_wl.log_linear(freqs, fwhm_ms) / 1000.0)
        kernels = [_wl.morlet_wavelet(f, s, sample_rate_hz)[None, :] for f, s in zip(freqs, sigma)]
        return _Kernels(kernels, _wl.cone_halfwidth_s(sigma), 1.0, "Morlet wavelet")
    half = int(round(taper_length_ms * sample_rate_hz / 2000.0))
    tapers, _ = _mt.dpss_tapers(2 * half + 1, nw)
    kernels = [_mt.multitaper_kernels(f, tapers, sample_rate_hz) for f in freqs]
    return _Kernels(
        kernels, np.full(freqs.size, half / sample_rate_hz), _mt.psd_scale(sample_rate_hz), "multitaper window"
    )


def _output_samples(epochs: Epochs, time_step_ms, *, subject) -> slice:
    """The samples kept on the output grid, as a slice with explicit bounds."""
    n_samples = epochs.data.shape[-1]
    if time_step_ms is None:
        return slice(0, n_samples, 1)
    step = time_step_ms * epochs.sample_rate_hz / 1000.0
    if step < 0.5 or abs(step - round(step)) > 1e-6:
        raise UserError(
            f"subject {subject}: time_step_ms must be a positive multiple of the "
            f"sample interval ({1000.0 / epochs.sample_rate_hz:g} ms at {epochs.sample_rate_hz:g} Hz), "
            f"got {time_step_ms:g}"
        )
    step = int(round(step))
    zero = -int(round(epochs.epoch_start_s * epochs.sample_rate_hz))
    return slice(zero % step, n_samples, step)


def _cone_of_influence(kernels: _Kernels, all_times, times) -> np.ndarray:
    """valid (n_freqs, n_times): True where the kernel stays inside the epoch."""
    tol = 1e-9
    from_start = times - all_times[0]
    to_end = all_times[-1] - times
    hw = kernels.halfwidth_s[:, None]
    return (from_start[None, :] >= hw - tol) & (to_end[None, :] >= hw - tol)


def _check_fits(kernels: _Kernels, freqs, valid, all_times, *, subject) -> None:
    """Raise when some frequency keeps no valid time point."""
    empty = ~valid.any(axis=1)
    if empty.any():
        first, last = all_times[0] * 1000.0, all_times[-1] * 1000.0
        worst = kernels.halfwidth_s[empty].max() * 1000.0
        raise UserError(
            f"subject {subject}: the {kernels.name} at {np.round(freqs[empty], 2).tolist()} Hz "
            f"reaches up to {worst:.0f} ms to each side, longer than the epoch ({first:g} to "
            f"{last:g} ms, {last - first:g} ms) allows: lengthen the epoch, shorten the "
            "wavelets/window or drop those frequencies"
        )


def baseline_window(times, all_times, window_ms, *, subject) -> np.ndarray:
    """Output time points inside ``window_ms`` [start, end] (ms), which must lie inside the epoch.

    ``times`` (output grid) and ``all_times`` (every sample) in s; bool (n_times,).
    """
    start, stop = window_ms
    tol_ms = 1e-6
    first, last = all_times[0] * 1000.0, all_times[-1] * 1000.0
    if not (start < stop and start >= first - tol_ms and stop <= last + tol_ms):
        raise UserError(
            f"subject {subject}: baseline window {start:g} to {stop:g} ms lies "
            f"outside the epoch ({first:g} to {last:g} ms)"
        )
    ms = times * 1000.0
    return (ms >= start - tol_ms) & (ms <= stop + tol_ms)


def _baseline_points(times, all_times, valid, freqs, mode, window_ms, *, subject) -> np.ndarray:
    """Output time points inside the baseline window (all False without a baseline)."""
    if mode == "none":
        return np.zeros(times.size, dtype=bool)
    start, stop = window_ms
    inside = baseline_window(times, all_times, window_ms, subject=subject)
    needed = 2 if mode == "zscore" else 1
    if inside.sum() < needed:
        raise UserError(
            f"subject {subject}: baseline window {start:g} to {stop:g} ms holds "
            f"{inside.sum()} output time points, {mode} needs at least {needed}"
        )
    edge = ~valid[:, inside].all(axis=1)
    if edge.any():
        warnings.warn(
            f"subject {subject}: baseline window {start:g} to {stop:g} ms reaches into "
            f"the edge zone (cone of influence) at {np.round(freqs[edge], 2).tolist()} "
            "Hz",
            FamwiseWarning,
            stacklevel=3,
        )
    return inside


def _frequency_blocks(kernels: _Kernels, n_samples: int, n_epochs: int):
    """Consecutive frequency blocks: (row slice, FFT length, kernel spectra (rows, taps, n_fft))."""
    blocks = []
    n_freqs = len(kernels.kernels)
    start = 0
    while start < n_freqs:
        stop = start + 1
        while stop < n_freqs:
            half = max(k.shape[1] for k in kernels.kernels[start : stop + 1]) // 2
            n_fft = scipy.fft.next_fast_len(n_samples + half)
            if (stop + 1 - start) * n_epochs * n_fft * 8 > BLOCK_BYTES:
                break
            stop += 1
        half = max(k.shape[1] for k in kernels.kernels[start:stop]) // 2
        n_fft = scipy.fft.next_fast_len(n_samples + half)
        spectra = np.stack([_centred_spectrum(k, n_fft) for k in kernels.kernels[start:stop]])
        blocks.append((slice(start, stop), n_fft, spectra))
        start = stop
    return blocks


def _centred_spectrum(kernel: np.ndarray, n_fft: int) -> np.ndarray:
    """FFT of kernels (n_tapers, n_taps) placed with their centre at sample 0 (circularly).

    With the signal zero-padded to ``n_fft >= n_samples + n_taps // 2``, the
    circular convolution at sample i equals the linear convolution centred
    on i (scipy.signal.fftconvolve mode "same").
    """
    half = kernel.shape[1] // 2
    buffer = np.zeros((kernel.shape[0], n_fft), dtype=complex)
    buffer[:, : half + 1] = kernel[:, half:]
    if half:
        buffer[:, -half:] = kernel[:, :half]
    return scipy.fft.fft(buffer, axis=-1).astype(np.complex64)


def _block_measure(
    spectrum, kernel_fft, keep, spans, *, scale, measure, average, trim, single_epoch_mode, in_window
) -> np.ndarray:
    """The measure of one channel and frequency block per condition.

    Parameters
    ----------
    spectrum : ndarray, complex64 (n_rows, n_fft)
        FFT of the channel's epochs, each condition's epochs in one run of rows.
    kernel_fft : ndarray, complex64 (n_block_freqs, n_tapers, n_fft)
    keep : slice
        The output samples.
    spans : list of slice
        Rows of each condition.

    Returns
    -------
    ndarray, shape (n_conditions, n_block_freqs, n_out)
    """
    n_freqs, n_tapers = kernel_fft.shape[:2]
    n_out = len(range(*keep.indices(spectrum.shape[-1])))
    per_epoch = average == "trimmed" or single_epoch_mode != "none"
    result = np.zeros((len(spans), n_freqs, n_out))
    epoch_maps = (
        [np.zeros((span.stop - span.start, n_freqs, n_out), dtype=np.float32) for span in spans] if per_epoch else []
    )
    weight = scale / n_tapers
    for taper in range(n_tapers):
        product = spectrum[:, None, :] * kernel_fft[None, :, taper, :]
        coef = scipy.fft.ifft(product, axis=-1, overwrite_x=True)
        del product
        for c, span in enumerate(spans):
            part = coef[span, :, keep]
            if measure == "induced":
                part -= part.mean(axis=0)
            if measure == "itpc":
                modulus = np.abs(part)
                unit = np.divide(part, modulus, out=np.zeros_like(part), where=modulus > 0)
                result[c] = np.abs(unit.mean(axis=0, dtype=np.complex128))
            elif per_epoch:
                _add_epoch_power(coef, span.start, keep.start, keep.step, weight, epoch_maps[c])
            else:
                _add_mean_power(coef, span.start, span.stop, keep.start, keep.step, weight, result[c])
    for c, values in enumerate(epoch_maps):
        if single_epoch_mode != "none":
            values = _baseline.normalise(values, *_baseline.baseline_stats(values, in_window), mode=single_epoch_mode)
        result[c] = values.mean(axis=0, dtype=float) if average == "mean" else trim_mean(values, trim, axis=0)
    return result


def _apply_baseline(raw, n_epochs, in_window, *, mode, pooled) -> np.ndarray:
    """Normalise averaged maps (n_conditions, n_channels, n_freqs, n_times) by their baseline."""
    if pooled:
        weights = n_epochs / n_epochs.sum()
        reference = np.tensordot(weights, raw, axes=1)
        mean, sd = _baseline.baseline_stats(reference, in_window)
        return _baseline.normalise(raw, mean[None], sd[None], mode=mode)
    mean, sd = _baseline.baseline_stats(raw, in_window)
    return _baseline.normalise(raw, mean, sd, mode=mode)
