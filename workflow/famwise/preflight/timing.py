"""Checks of frequencies and time windows against each subject's sampling rate and epoch span.

They reuse the decomposition's own kernels, output grid and cone of influence,
so a window accepted here is accepted by the decomposition and contrast stages.
"""

import importlib
import warnings
from types import SimpleNamespace

import numpy as np

from famwise.errors import UserError
from famwise.preflight.headers import SubjectHeader
from famwise.preflight.where import Where

TOL_MS = 1e-6


def check_timing(plan, headers: dict[str, SubjectHeader], where: Where) -> list[str]:
    """Check every distinct (sampling rate, epoch span) once; return the decomposition's warnings (deduplicated)."""
    spans = {}
    for subject, header in headers.items():
        if header.sample_rate_hz is not None:
            spans.setdefault((header.sample_rate_hz, round(header.epoch_start_s, 9), header.n_samples), subject)
    found = []
    for (sample_rate_hz, epoch_start_s, n_samples), subject in spans.items():
        for message in _check_span(plan, where, sample_rate_hz, epoch_start_s, n_samples, subject):
            if message not in found:
                found.append(message)
    return found


def _check_span(
    plan, where: Where, sample_rate_hz: float, epoch_start_s: float, n_samples: int, subject: str
) -> list[str]:
    from famwise.design import _freq_index, _time_index

    dec = _decomposition()
    tf = plan.study.decomposition
    if tf.method == "none":
        return _check_voltage_span(plan, where, sample_rate_hz, epoch_start_s, n_samples, subject)
    grid = tf.frequencies
    nyquist = sample_rate_hz / 2.0
    if grid.highest_hz >= nyquist:
        raise UserError(
            f"{where('decomposition', 'frequencies', 'highest_hz')}: {grid.highest_hz:g} Hz is not below the Nyquist frequency "
            f"{nyquist:g} Hz of subject {subject}'s data (sampled at {sample_rate_hz:g} Hz)"
        )
    freqs = dec.frequency_grid(grid.lowest_hz, grid.highest_hz, grid.count, grid.spacing)
    kernels = dec._build_kernels(
        freqs,
        sample_rate_hz,
        method=tf.method,
        cycles=_pair(tf.cycles),
        fwhm_ms=_pair(tf.fwhm_ms),
        taper_length_ms=tf.taper_length_ms,
        nw=tf.nw,
    )
    epochs = SimpleNamespace(
        data=np.empty((0, 0, n_samples)), sample_rate_hz=sample_rate_hz, epoch_start_s=epoch_start_s
    )
    try:
        keep = dec._output_samples(epochs, tf.time_step_ms, subject=subject)
    except UserError as error:
        raise UserError(f"{where('decomposition', 'time_step_ms')}: {_drop_subject(error, subject)}") from None
    all_times = epoch_start_s + np.arange(n_samples) / sample_rate_hz
    times = all_times[keep]
    valid = dec._cone_of_influence(kernels, all_times, times)
    width_key = (
        ("decomposition", "taper_length_ms")
        if tf.method == "multitaper"
        else ("decomposition", "fwhm_ms" if tf.fwhm_ms is not None else "cycles")
    )
    try:
        dec._check_fits(kernels, freqs, valid, all_times, subject=subject)
    except UserError as error:
        raise UserError(f"{where(*width_key)}: {_drop_subject(error, subject)}") from None
    found = _check_baseline(plan, where, times, all_times, valid, freqs)
    analysis = plan.study.analysis
    index = _freq_index(freqs, None if analysis.freq_hz is None else list(analysis.freq_hz))
    try:
        _time_index(times, valid[index], freqs[index], None if analysis.time_ms is None else list(analysis.time_ms))
    except UserError as error:
        key = ("analysis", "time_ms") if analysis.time_ms is not None else width_key
        raise UserError(f"{where(*key)}: {str(error).split(': ', 1)[1]}") from None
    return found


def _check_voltage_span(
    plan, where: Where, sample_rate_hz: float, epoch_start_s: float, n_samples: int, subject: str
) -> list[str]:
    """Voltage maps: the low-pass, time step, baseline and analysis windows fit the subject's sampling and epoch."""
    from famwise.decomposition import voltage
    from famwise.design import _time_index

    tf = plan.study.decomposition
    epochs = SimpleNamespace(
        data=np.empty((0, 0, n_samples)), sample_rate_hz=sample_rate_hz, epoch_start_s=epoch_start_s
    )
    try:
        keep = _decomposition()._output_samples(epochs, tf.time_step_ms, subject=subject)
    except UserError as error:
        raise UserError(f"{where('decomposition', 'time_step_ms')}: {_drop_subject(error, subject)}") from None
    try:
        voltage.check_filters(epochs, subject=subject, lowpass_hz=tf.lowpass_hz, time_step_ms=tf.time_step_ms)
    except UserError as error:
        raise UserError(f"{where('decomposition', 'lowpass_hz')}: {_drop_subject(error, subject)}") from None
    all_times = epoch_start_s + np.arange(n_samples) / sample_rate_hz
    times = all_times[keep]
    try:
        voltage.baseline_samples(times, all_times, tf.baseline.mode, tf.baseline.window_ms, subject=subject)
    except UserError as error:
        key = ("decomposition", "baseline", "window_ms")
        raise UserError(f"{where(*key)}: {_drop_subject(error, subject)}") from None
    analysis = plan.study.analysis
    try:
        _time_index(times, np.ones((1, times.size), bool), np.zeros(1), analysis.time_ms and list(analysis.time_ms))
    except UserError as error:
        raise UserError(f"{where('analysis', 'time_ms')}: {str(error).split(': ', 1)[1]}") from None
    return []


def _check_baseline(plan, where: Where, times, all_times, valid, freqs) -> list[str]:
    """The baseline window lies inside the epoch; its edge-zone warning, if any."""
    dec = _decomposition()
    baseline = plan.study.decomposition.baseline
    if baseline.mode == "none":
        return []
    start, stop = baseline.window_ms
    first, last = all_times[0] * 1000.0, all_times[-1] * 1000.0
    if start < first - TOL_MS or stop > last + TOL_MS:
        raise UserError(
            f"{where('decomposition', 'baseline', 'window_ms')}: [{start:g}, {stop:g}] ms lies outside the epoch "
            f"({first:g} to {last:g} ms)"
        )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            dec._baseline_points(times, all_times, valid, freqs, baseline.mode, (start, stop), subject="")
        except UserError as error:
            raise UserError(f"{where('decomposition', 'baseline', 'window_ms')}: {_drop_subject(error, '')}") from None
    return [_drop_subject(w.message, "") for w in caught]


def _decomposition():
    """The decomposition module (its name is shadowed by the function `famwise.decomposition.decompose`)."""
    return importlib.import_module("famwise.decomposition.decompose")


def _drop_subject(message, subject: str) -> str:
    """A decomposition message without its leading ``subject <id>:``."""
    return str(message).removeprefix(f"subject {subject}:").strip()


def _pair(value):
    return tuple(value) if isinstance(value, (list, tuple)) else value
