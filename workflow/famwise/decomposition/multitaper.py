"""Multitaper kernels from discrete prolate spheroidal sequences (DPSS).

A taper of T seconds with time-half-bandwidth product NW has half-bandwidth
W = NW / T Hz (frequency resolution 2W) and K = 2 NW - 1 well-concentrated
tapers. Power is the one-sided power spectral density averaged over tapers,
in V^2/Hz.

References
----------
Slepian D (1978). Prolate spheroidal wave functions, Fourier analysis, and
uncertainty - V: the discrete case. Bell Syst Tech J 57(5):1371-1430.
Thomson DJ (1982). Spectrum estimation and harmonic analysis. Proc IEEE
70(9):1055-1096.
Percival DB, Walden AT (1993). Spectral Analysis for Physical Applications.
Cambridge University Press.
"""

import numpy as np
from scipy.signal import windows


def taper_count(nw: float) -> int:
    """Number of well-concentrated tapers, K = floor(2 NW) - 1, at least 1."""
    return max(1, int(np.floor(2.0 * nw + 1e-9)) - 1)


def resolution_hz(window_s: float, nw: float) -> float:
    """Full frequency resolution 2W = 2 NW / T in Hz."""
    return 2.0 * nw / window_s


def dpss_tapers(n_samples: int, nw: float) -> tuple[np.ndarray, np.ndarray]:
    """The DPSS tapers used for a window of ``n_samples``.

    Parameters
    ----------
    n_samples : int
        Window length in samples.
    nw : float
        Time-half-bandwidth product NW (Percival & Walden 1993).

    Returns
    -------
    tapers : ndarray, shape (K, n_samples)
        L2-normalised (each taper's squares sum to 1).
    ratios : ndarray, shape (K,)
        Spectral concentration of each taper within +-W.
    """
    return windows.dpss(n_samples, nw, Kmax=taper_count(nw), return_ratios=True)


def psd_scale(sample_rate_hz: float) -> float:
    """Factor from |tapered DFT|^2 (L2-normalised taper) to one-sided PSD in V^2/Hz."""
    return 2.0 / sample_rate_hz


def multitaper_kernels(freq_hz: float, tapers: np.ndarray, sample_rate_hz: float) -> np.ndarray:
    """Tapers modulated to ``freq_hz``, centred on their middle sample.

    Parameters
    ----------
    freq_hz : float
        Centre frequency in Hz.
    tapers : ndarray, shape (K, n_samples)
        From `dpss_tapers`.
    sample_rate_hz : float
        Sampling rate in Hz.

    Returns
    -------
    ndarray of complex, shape (K, n_samples)
    """
    n = tapers.shape[1]
    tau = (np.arange(n) - (n - 1) / 2.0) / sample_rate_hz
    return tapers * np.exp(2j * np.pi * freq_hz * tau)
