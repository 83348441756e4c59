"""Complex Morlet wavelets: width conversions, construction and cone of influence.

Width conventions (all Gaussian identities): a wavelet of ``n`` cycles at
frequency ``f`` has temporal SD ``sigma_t = n / (2 pi f)``, spectral SD
``sigma_f = f / n = 1 / (2 pi sigma_t)`` and full widths at half maximum
``FWHM = 2 sqrt(2 ln 2) sigma``.

References
----------
Cohen MX (2019). A better way to define and describe Morlet wavelets for
time-frequency analysis. NeuroImage 199:81-86.
Torrence C, Compo GP (1998). A practical guide to wavelet analysis. Bull Am
Meteorol Soc 79(1):61-78.
"""

import numpy as np

FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))
"""Full width at half maximum of a Gaussian over its SD, 2 sqrt(2 ln 2)."""

SUPPORT_SIGMAS = 5.0
"""Wavelets are truncated at +-5 temporal SDs (envelope 3.7e-6 of its peak)."""


def log_linear(frequencies_hz: np.ndarray, value: float | tuple[float, float]) -> np.ndarray:
    """A width setting per frequency, constant or growing log-linearly.

    Parameters
    ----------
    frequencies_hz : ndarray, shape (n_freqs,)
        Frequencies in Hz, positive.
    value : float or (float, float)
        One value for every frequency, or (value at the lowest frequency,
        value at the highest). In between, ``log(value)`` is linear in
        ``log(f)``, so with log-spaced frequencies the values are log-spaced.

    Returns
    -------
    ndarray, shape (n_freqs,)
    """
    freqs = np.asarray(frequencies_hz, dtype=float)
    given = np.atleast_1d(np.asarray(value, dtype=float))
    if given.size == 1:
        return np.full(freqs.shape, given[0])
    low, high = given
    f_lo, f_hi = freqs.min(), freqs.max()
    if f_hi == f_lo:
        return np.full(freqs.shape, low)
    position = np.log(freqs / f_lo) / np.log(f_hi / f_lo)
    return low * (high / low) ** position


def sigma_t_from_cycles(frequencies_hz: np.ndarray, cycles: np.ndarray) -> np.ndarray:
    """Temporal SD in s of wavelets with ``cycles`` cycles: n / (2 pi f)."""
    return np.asarray(cycles, dtype=float) / (2.0 * np.pi * np.asarray(frequencies_hz, dtype=float))


def sigma_from_fwhm(fwhm: np.ndarray) -> np.ndarray:
    """Gaussian SD from its full width at half maximum (same unit)."""
    return np.asarray(fwhm, dtype=float) / FWHM_PER_SIGMA


def fwhm_from_sigma(sigma: np.ndarray) -> np.ndarray:
    """Gaussian full width at half maximum from its SD (same unit)."""
    return np.asarray(sigma, dtype=float) * FWHM_PER_SIGMA


def spectral_fwhm_hz(fwhm_t_s: np.ndarray) -> np.ndarray:
    """Spectral FWHM in Hz of a Morlet wavelet with temporal FWHM in s: 4 ln 2 / (pi FWHM_t)."""
    return 4.0 * np.log(2.0) / (np.pi * np.asarray(fwhm_t_s, dtype=float))


def cone_halfwidth_s(sigma_t: np.ndarray) -> np.ndarray:
    """Distance from an epoch edge within which a Morlet coefficient is edge-affected.

    The e-folding time of the wavelet power, sqrt(2) sigma_t (Torrence & Compo 1998,
    Sec. 3g): closer to an edge than this, edge effects exceed e^-2 of the power.

    Parameters
    ----------
    sigma_t : ndarray
        Temporal SD in s.

    Returns
    -------
    ndarray
        Half-width in s, same shape.
    """
    return np.sqrt(2.0) * np.asarray(sigma_t, dtype=float)


def morlet_wavelet(freq_hz: float, sigma_t: float, sample_rate_hz: float) -> np.ndarray:
    """One complex Morlet wavelet, amplitude-normalised.

    The envelope sums to 2, so the wavelet coefficient of a real sinusoid of
    amplitude A at ``freq_hz`` has modulus A (its power is A^2).

    Parameters
    ----------
    freq_hz : float
        Centre frequency in Hz.
    sigma_t : float
        Temporal SD of the Gaussian envelope in s.
    sample_rate_hz : float
        Sampling rate in Hz.

    Returns
    -------
    ndarray of complex, shape (n_taps,)
        Odd length, centred on its middle sample, support +-5 sigma_t.
    """
    half = int(np.ceil(SUPPORT_SIGMAS * sigma_t * sample_rate_hz))
    tau = np.arange(-half, half + 1) / sample_rate_hz
    envelope = np.exp(-(tau**2) / (2.0 * sigma_t**2))
    return (2.0 / envelope.sum()) * envelope * np.exp(2j * np.pi * freq_hz * tau)
