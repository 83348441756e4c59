"""Naive time-frequency decomposition: one scipy.signal.fftconvolve per epoch, channel and kernel.

The oracle for the fast path in `famwise.decomposition` and its baseline in
`famwise bench`. No baseline normalisation, plain mean over epochs.
"""

import numpy as np
from scipy.signal import fftconvolve


def naive_decomposition(
    data: np.ndarray, kernels: list[np.ndarray], *, measure: str, scale: float, keep: slice
) -> np.ndarray:
    """Condition-average measure of epochs by direct convolution loops.

    Parameters
    ----------
    data : ndarray, shape (n_epochs, n_channels, n_samples)
        The epochs of one condition, in volts.
    kernels : list of ndarray, complex (n_tapers, n_taps)
        One entry per frequency (a Morlet wavelet has one taper).
    measure : {"power", "induced", "itpc"}
    scale : float
        Factor from |coefficient|^2 to power (1 for Morlet, 2/sample_rate_hz for multitaper PSD).
    keep : slice
        Output samples.

    Returns
    -------
    ndarray, shape (n_channels, n_freqs, n_out)
    """
    n_epochs, n_channels, n_samples = data.shape
    n_out = len(range(*keep.indices(n_samples)))
    out = np.zeros((n_channels, len(kernels), n_out))
    for ch in range(n_channels):
        for fi, tapers in enumerate(kernels):
            for taper in tapers:
                coefs = np.empty((n_epochs, n_out), dtype=complex)
                for ep in range(n_epochs):
                    coefs[ep] = fftconvolve(data[ep, ch], taper, mode="same")[keep]
                if measure == "itpc":
                    out[ch, fi] = np.abs(np.mean(coefs / np.abs(coefs), axis=0))
                    continue
                if measure == "induced":
                    coefs = coefs - coefs.mean(axis=0)
                out[ch, fi] += np.mean(np.abs(coefs) ** 2, axis=0) * scale / len(tapers)
    return out
