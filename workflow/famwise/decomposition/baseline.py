"""Baseline normalisation of time-frequency power.

For power P and the mean baseline power B over the baseline window (same
channel and frequency):

- ``db``: 10 log10(P / B)
- ``percent``: 100 (P - B) / B
- ``ratio``: P / B
- ``zscore``: (P - B) / S, S the SD (ddof = 1) of the power over the baseline
  time points
- ``none``: P unchanged

References
----------
Cohen MX (2014). Analyzing Neural Time Series Data, ch. 18. MIT Press.
"""

import numpy as np

MODES = ("db", "percent", "zscore", "ratio", "none")

MODE_WORDS = {
    "db": "dB change",
    "percent": "percent change",
    "zscore": "z-score",
    "ratio": "ratio",
}


def baseline_stats(power: np.ndarray, in_window: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean and SD (ddof = 1) of power over the baseline time points.

    Parameters
    ----------
    power : ndarray, shape (..., n_times)
    in_window : ndarray of bool, shape (n_times,)
        The baseline time points.

    Returns
    -------
    mean, sd : ndarray, shape (..., 1)
        SD is NaN when the window has a single time point.
    """
    base = power[..., in_window]
    mean = base.mean(axis=-1, keepdims=True)
    if base.shape[-1] < 2:
        return mean, np.full_like(mean, np.nan)
    return mean, base.std(axis=-1, ddof=1, keepdims=True)


def normalise(power: np.ndarray, mean: np.ndarray, sd: np.ndarray, *, mode: str) -> np.ndarray:
    """Express power relative to its baseline.

    Parameters
    ----------
    power : ndarray, shape (..., n_times)
        Power (any unit).
    mean, sd : ndarray, broadcastable to ``power``
        Baseline mean and SD from `baseline_stats`.
    mode : {"db", "percent", "zscore", "ratio", "none"}

    Returns
    -------
    ndarray, shape of ``power``
    """
    if mode == "db":
        return 10.0 * np.log10(power / mean)
    if mode == "percent":
        return 100.0 * (power - mean) / mean
    if mode == "ratio":
        return power / mean
    if mode == "zscore":
        return (power - mean) / sd
    if mode == "none":
        return power
    raise ValueError(f"baseline mode must be one of {MODES}, got {mode!r}")


def describe(mode: str, window_ms: tuple[float, float] | None, *, pooled: bool, single_epoch: bool) -> str:
    """A one-line description of the baseline, stored in the time-frequency file.

    Examples: ``"dB change from -400 to -100 ms, per condition"``, ``"none"``.
    """
    if mode == "none":
        return "none"
    start, stop = window_ms
    if single_epoch:
        scope = "each epoch relative to its own baseline before averaging"
    elif pooled:
        scope = "pooled over conditions"
    else:
        scope = "per condition"
    return f"{MODE_WORDS[mode]} from {start:g} to {stop:g} ms, {scope}"
