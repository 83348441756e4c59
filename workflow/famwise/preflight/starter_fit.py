"""Time-frequency settings for ``famwise init`` that fit the data found: no warning, no error on `check`.

The starter decomposes 4 to 40 Hz with Morlet wavelets of 3 to 10 cycles. Its
baseline window must lie where those wavelets stay inside the epoch at every
frequency (the cone of influence, `famwise.timefreq.wavelets.cone_halfwidth_s`),
its highest frequency below Nyquist and its time step a whole number of samples.
"""

import math

import numpy as np

from famwise.timefreq import frequency_grid
from famwise.timefreq.wavelets import cone_halfwidth_s, log_linear, sigma_t_from_cycles

START_HZ, STOP_HZ, COUNT, CYCLES = 4.0, 40.0, 20, (3.0, 10.0)
BASELINE_MS = (-400.0, -100.0)
EPOCH_END_MS = 1500.0
STEP_MS = 20.0


def edge_halfwidth_ms(stop_hz: float) -> float:
    """Largest cone-of-influence half-width (ms) of the starter's wavelets up to ``stop_hz``."""
    freqs = frequency_grid(START_HZ, stop_hz, COUNT, "log")
    return float(np.max(cone_halfwidth_s(sigma_t_from_cycles(freqs, log_linear(freqs, CYCLES))))) * 1000.0


def starter_timing(sfreq: float, epoch_ms: tuple[float, float] | None) -> dict:
    """Settings for the starter spec.

    Parameters
    ----------
    sfreq : float
        Sampling rate of the data in Hz.
    epoch_ms : (float, float) or None
        First and last sample time of the epochs in ms (epochs files); None when
        famwise cuts the epochs (BIDS), so that the epoch window is chosen here.

    Returns
    -------
    dict
        ``stop_hz``, ``time_step_ms``, ``epoch_ms`` (None for epochs files) and
        ``baseline_ms`` (None when the epochs leave no edge-free time before 0).
    """
    stop_hz = STOP_HZ if STOP_HZ < 0.45 * sfreq else float(math.floor(0.4 * sfreq))
    step_ms = max(1, round(STEP_MS * sfreq / 1000.0)) * 1000.0 / sfreq
    halfwidth = edge_halfwidth_ms(stop_hz)
    if epoch_ms is None:
        start = -100.0 * math.ceil((halfwidth - BASELINE_MS[0]) / 100.0)
        return {
            "stop_hz": stop_hz,
            "time_step_ms": step_ms,
            "epoch_ms": (start, EPOCH_END_MS),
            "baseline_ms": BASELINE_MS,
        }
    free_from = 10.0 * math.ceil((epoch_ms[0] + halfwidth) / 10.0 + 1e-9)
    baseline = (max(free_from, BASELINE_MS[0]), BASELINE_MS[1])
    if baseline[1] - baseline[0] < 100.0:
        baseline = (free_from, 0.0) if free_from <= -100.0 else None
    return {"stop_hz": stop_hz, "time_step_ms": step_ms, "epoch_ms": None, "baseline_ms": baseline}
