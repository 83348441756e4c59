"""Benchmark: one subject's voltage maps (condition means, baseline, decimation), famwise against the per-epoch route."""

import time

import numpy as np
import scipy.signal

from famwise.benchmarks import BenchRow
from famwise.benchmarks.decomposition import _FULL, _QUICK, _synthetic_epochs

_STEP_MS = 10.0
_BASELINE_MS = (-200.0, 0.0)
_TARGET_S = 1.0
_CONDITIONS = ("left", "right")


def _per_epoch_reference(epochs, *, step: int) -> list[np.ndarray]:
    """The slow route: decimate every epoch (scipy.signal.decimate), average, subtract the baseline mean (numpy).

    Returns each condition's map (n_channels, n_times) in microvolts.
    """
    start = int(round(-epochs.epoch_start_s * epochs.sample_rate_hz)) % step
    times = epochs.times[start::step] * 1000.0
    base = (times >= _BASELINE_MS[0] - 1e-6) & (times <= _BASELINE_MS[1] + 1e-6)
    means = []
    for label in _CONDITIONS:
        decimated = scipy.signal.decimate(
            epochs.data[epochs.labels == label][..., start:], step, ftype="fir", zero_phase=True, axis=-1
        )
        mean = decimated.mean(axis=0) * 1e6
        means.append(mean - mean[:, base].mean(axis=1, keepdims=True))
    return means


def bench_voltage(quick: bool) -> BenchRow:
    """Time `famwise.decomposition.voltage_maps` on the decomposition bench's synthetic subject.

    Full size: 300 epochs x 64 channels x 2.5 s at 500 Hz, two conditions,
    10 ms time step through the anti-aliasing decimator, -200 to 0 ms
    baseline subtracted. The reference decimates every epoch before
    averaging (equal by linearity; the row checks the two agree).
    """
    from famwise.decomposition import voltage_maps

    size = _QUICK if quick else _FULL
    epochs = _synthetic_epochs(size)
    start = time.perf_counter()
    maps = voltage_maps(
        epochs,
        subject="bench",
        conditions={label: [label] for label in _CONDITIONS},
        time_step_ms=_STEP_MS,
        baseline_mode="subtract",
        baseline_window_ms=_BASELINE_MS,
    )
    famwise_s = time.perf_counter() - start
    step = int(round(_STEP_MS * epochs.sample_rate_hz / 1000.0))
    start = time.perf_counter()
    reference = _per_epoch_reference(epochs, step=step)
    reference_s = time.perf_counter() - start
    largest = max(float(np.abs(maps.values[c, :, 0] - reference[c]).max()) for c in range(len(_CONDITIONS)))
    return BenchRow(
        task="voltage decomposition (condition means, baseline, decimation)",
        size=f"{size['epochs']} epochs x {size['channels']} channels x {size['seconds']:g} s at "
        f"{size['sample_rate_hz']:g} Hz, {_STEP_MS:g} ms step",
        famwise_s=famwise_s,
        reference_s=reference_s,
        target=f"< {_TARGET_S:g} s",
        met=famwise_s < _TARGET_S and largest < 1e-3,
        note=(
            "reference: scipy.signal.decimate on every epoch, then numpy's mean and baseline; "
            f"largest difference {largest:.1e} µV"
        ),
    )
