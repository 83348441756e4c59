"""Multitaper: DPSS tapers, counts, resolution and power calibration."""

import numpy as np
import pytest
from scipy.signal import lfilter, welch
from scipy.signal.windows import dpss

from famwise.decomposition import decompose
from famwise.decomposition import multitaper as mt
from famwise.epochs import Epochs


@pytest.mark.parametrize(
    ("n_samples", "nw", "ratios"),
    [  # values of scipy.signal.windows.dpss(M, NW, Kmax, return_ratios=True)
        (500, 2.0, [0.99994277, 0.99756210, 0.95939335]),
        (1000, 4.0, [1.0, 0.99999997, 0.99999879, 0.99996756, 0.99941019, 0.99250534, 0.93665556]),
        (256, 3.0, [0.99999987, 0.99999078, 0.99971551, 0.99492006, 0.94616573]),
    ],
)
def test_tapers_equal_scipy_dpss(n_samples, nw, ratios):
    tapers, found = mt.dpss_tapers(n_samples, nw)
    assert tapers.shape == (2 * nw - 1, n_samples)  # K = 2NW - 1 (Percival & Walden 1993)
    np.testing.assert_allclose(found, ratios, atol=1e-7)  # scipy.signal.windows.dpss(..., return_ratios=True)
    # scipy.signal.windows.dpss with Kmax: the same L2-normalised tapers
    np.testing.assert_allclose(tapers, dpss(n_samples, nw, Kmax=int(2 * nw - 1)), atol=1e-12)
    np.testing.assert_allclose(tapers @ tapers.T, np.eye(tapers.shape[0]), atol=1e-12)


def test_counts_and_resolution():
    # Percival & Walden (1993): T = 0.5 s, W = 4 Hz -> NW = 2, K = 3, resolution 8 Hz; T = 1 s, W = 4 Hz -> K = 7
    assert mt.taper_count(2.0) == 3
    assert mt.taper_count(4.0) == 7
    assert mt.resolution_hz(0.5, 2.0) == pytest.approx(8.0)
    assert mt.resolution_hz(1.0, 4.0) == pytest.approx(8.0)


def _epochs(data, sample_rate_hz):
    return Epochs(
        data=data[:, None, :],
        sample_rate_hz=sample_rate_hz,
        epoch_start_s=0.0,
        channels=("Cz",),
        labels=np.array(["a"] * data.shape[0]),
    )


def test_sinusoid_power_integrates_to_half_amplitude_squared():
    # Parseval (common practice): fs 1 kHz, T = 0.5 s, NW = 2 (K = 3), x = 2 cos(2 pi 100 t
    # + 0.3): one-sided PSD integrated over 100 +- 12 Hz = A^2 / 2 = 2 (rel tol 1 %)
    fs = 1000.0
    t = np.arange(1500) / fs
    epochs = _epochs(2.0 * np.cos(2 * np.pi * 100.0 * t + 0.3)[None, :], fs)
    freqs = np.arange(88.0, 112.01, 0.25)
    maps = decompose(
        epochs,
        subject="s1",
        conditions={"c": ["a"]},
        frequencies_hz=freqs,
        method="multitaper",
        taper_length_ms=500.0,
        nw=2.0,
    )
    centre = maps.values[0, 0, :, t.size // 2].astype(float)
    assert np.trapezoid(centre, freqs) == pytest.approx(2.0, rel=0.01)


def test_white_noise_flat_at_psd_level():
    # white noise of SD 1.5 has two-sided PSD sigma^2/fs, one-sided 2 sigma^2/fs = 0.0045
    # (Parseval, common practice); flat over frequency
    fs, sd = 1000.0, 1.5
    rng = np.random.default_rng(11)
    epochs = _epochs(rng.normal(0, sd, (300, 1500)), fs)
    freqs = np.linspace(40.0, 400.0, 7)
    maps = decompose(
        epochs,
        subject="s1",
        conditions={"c": ["a"]},
        frequencies_hz=freqs,
        method="multitaper",
        taper_length_ms=500.0,
        nw=2.0,
    )
    level = np.array([maps.values[0, 0, i][maps.valid[i]].mean() for i in range(freqs.size)])
    np.testing.assert_allclose(level, 2 * sd**2 / fs, rtol=0.06)
    assert level.mean() == pytest.approx(2 * sd**2 / fs, rel=0.02)


def test_stationary_power_agrees_with_welch():
    # scipy.signal.welch (Hann, 500-sample segments) on the same AR(1) noise: the multitaper
    # PSD averaged over epochs and valid time agrees within 10 % (stated tolerance; both are
    # estimates of one smooth PSD, with different smoothing)
    fs = 1000.0
    rng = np.random.default_rng(5)
    data = lfilter([1.0], [1.0, -0.8], rng.normal(size=(100, 2000)), axis=-1)
    freqs = np.array([20.0, 50.0, 100.0, 200.0, 300.0])
    maps = decompose(
        _epochs(data, fs),
        subject="s1",
        conditions={"c": ["a"]},
        frequencies_hz=freqs,
        method="multitaper",
        taper_length_ms=500.0,
        nw=2.0,
    )
    ours = np.array([maps.values[0, 0, i][maps.valid[i]].mean() for i in range(freqs.size)])
    grid, psd = welch(data, fs=fs, nperseg=500, axis=-1)
    theirs = np.interp(freqs, grid, psd.mean(axis=0))
    np.testing.assert_allclose(ours, theirs, rtol=0.10)
