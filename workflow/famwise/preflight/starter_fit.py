"""Time-frequency settings for ``famwise init`` that fit the data found: no warning, no error on `check`.

The starter decomposes 4 to 40 Hz with Morlet wavelets of 3 to 10 cycles. Its
baseline window must lie where those wavelets stay inside the epoch at every
frequency (the cone of influence, `famwise.decomposition.wavelets.cone_halfwidth_s`),
its highest frequency below Nyquist and its time step a whole number of samples.
"""

import math

import numpy as np

from famwise.decomposition import frequency_grid
from famwise.decomposition.wavelets import cone_halfwidth_s, log_linear, sigma_t_from_cycles

LOWEST_HZ, HIGHEST_HZ, COUNT, CYCLES = 4.0, 40.0, 20, (3.0, 10.0)
BASELINE_MS = (-400.0, -100.0)
EPOCH_END_MS = 1500.0
STEP_MS = 20.0


def edge_halfwidth_ms(highest_hz: float) -> float:
    """Largest cone-of-influence half-width (ms) of the starter's wavelets up to ``highest_hz``."""
    freqs = frequency_grid(LOWEST_HZ, highest_hz, COUNT, "log")
    return float(np.max(cone_halfwidth_s(sigma_t_from_cycles(freqs, log_linear(freqs, CYCLES))))) * 1000.0


def starter_timing(sample_rate_hz: float, epoch_ms: tuple[float, float] | None) -> dict:
    """Settings for the starter spec.

    Parameters
    ----------
    sample_rate_hz : float
        Sampling rate of the data in Hz.
    epoch_ms : (float, float) or None
        First and last sample time of the epochs in ms (epochs files); None when
        famwise cuts the epochs (BIDS), so that the epoch window is chosen here.

    Returns
    -------
    dict
        ``highest_hz``, ``time_step_ms``, ``epoch_ms`` (None for epochs files) and
        ``baseline_ms`` (None when the epochs leave no edge-free time before 0).
    """
    highest_hz = HIGHEST_HZ if HIGHEST_HZ < 0.45 * sample_rate_hz else float(math.floor(0.4 * sample_rate_hz))
    step_ms = max(1, round(STEP_MS * sample_rate_hz / 1000.0)) * 1000.0 / sample_rate_hz
    halfwidth = edge_halfwidth_ms(highest_hz)
    if epoch_ms is None:
        start = -100.0 * math.ceil((halfwidth - BASELINE_MS[0]) / 100.0)
        return {
            "highest_hz": highest_hz,
            "time_step_ms": step_ms,
            "epoch_ms": (start, EPOCH_END_MS),
            "baseline_ms": BASELINE_MS,
        }
    free_from = 10.0 * math.ceil((epoch_ms[0] + halfwidth) / 10.0 + 1e-9)
    baseline = (max(free_from, BASELINE_MS[0]), BASELINE_MS[1])
    if baseline[1] - baseline[0] < 100.0:
        baseline = (free_from, 0.0) if free_from <= -100.0 else None
    return {"highest_hz": highest_hz, "time_step_ms": step_ms, "epoch_ms": None, "baseline_ms": baseline}
