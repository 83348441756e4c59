"""Benchmark: one subject's voltage maps (condition means, low-pass, decimation, baseline)."""

import time

import numpy as np
import scipy.signal

from famwise.benchmarks import BenchRow
from famwise.benchmarks.decomposition import _FULL, _QUICK, _synthetic_epochs

_LOWPASS_HZ = 40.0
_STEP_MS = 10.0
_TARGET_S = 1.0


def _per_epoch_reference(epochs, *, step: int) -> list[np.ndarray]:
    """Filter and decimate every epoch (scipy.signal.sosfiltfilt, scipy.signal.decimate), then average: the slow route."""
    sos = scipy.signal.butter(4, _LOWPASS_HZ, btype="low", fs=epochs.sample_rate_hz, output="sos")
    start = int(round(-epochs.epoch_start_s * epochs.sample_rate_hz)) % step
    means = []
    for label in ("left", "right"):
        filtered = scipy.signal.sosfiltfilt(sos, epochs.data[epochs.labels == label], axis=-1)
        means.append(scipy.signal.decimate(filtered[..., start:], step, ftype="fir", zero_phase=True, axis=-1).mean(0))
    return means


def bench_voltage(quick: bool) -> BenchRow:
    """Time `famwise.decomposition.voltage_maps` on the decomposition bench's synthetic subject.

    Full size: 300 epochs x 64 channels x 2.5 s at 500 Hz, two conditions,
    40 Hz low-pass, 10 ms time step, -200 to 0 ms baseline. The reference
    filters and decimates every epoch before averaging (equal by linearity;
    the row checks the two agree).
    """
    from famwise.decomposition import voltage_maps

    size = _QUICK if quick else _FULL
    epochs = _synthetic_epochs(size)
    start = time.perf_counter()
    maps = voltage_maps(
        epochs,
        subject="bench",
        conditions={"left": ["left"], "right": ["right"]},
        time_step_ms=_STEP_MS,
        lowpass_hz=_LOWPASS_HZ,
        baseline_mode="none",
    )
    famwise_s = time.perf_counter() - start
    step = int(round(_STEP_MS * epochs.sample_rate_hz / 1000.0))
    start = time.perf_counter()
    reference = _per_epoch_reference(epochs, step=step)
    reference_s = time.perf_counter() - start
    largest = max(float(np.abs(maps.values[c, :, 0] - 1e6 * reference[c]).max()) for c in range(2))
    return BenchRow(
        task="voltage maps (condition means, low-pass, decimation; one subject)",
        size=f"{size['epochs']} epochs x {size['channels']} channels x {size['seconds']:g} s at {size['sample_rate_hz']:g} Hz",
        famwise_s=famwise_s,
        reference_s=reference_s,
        target=f"< {_TARGET_S:g} s",
        met=famwise_s < _TARGET_S and largest < 1e-3,
        note=(
            f"reference: scipy.signal.sosfiltfilt and decimate on every epoch, then the mean; "
            f"largest difference {largest:.1e} µV"
        ),
    )
