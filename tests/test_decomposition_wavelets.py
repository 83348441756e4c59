"""Morlet wavelets: width relations, amplitude normalisation, cone of influence."""

import numpy as np
import pytest

from famwise.decomposition import decompose
from famwise.decomposition import wavelets as wl
from famwise.epochs import Epochs


@pytest.mark.parametrize(
    ("freq", "cycles", "sigma_t", "fwhm_t", "fwhm_f"),
    [  # Gaussian/Fourier identities (common practice); FWHM form after Cohen (2019), NeuroImage 199:81-86
        (10.0, 7.0, 0.1114085, 0.2623469, 3.3640286),
        (4.0, 3.0, 0.1193662, 0.2810864, 3.1397602),
        (40.0, 7.0, 0.0278521, 0.0655867, 13.456115),
        (10.0, 5.0, 0.0795775, 0.1873909, 4.7096404),
    ],
)
def test_width_relations(freq, cycles, sigma_t, fwhm_t, fwhm_f):
    # rel 1e-5: two FWHM_t entries (4 Hz/3 cycles, 10 Hz/5 cycles) are 1.7e-6 off
    # the product sigma_t * 2.3548200 of their own columns
    sigma = wl.sigma_t_from_cycles(np.array([freq]), np.array([cycles]))[0]
    assert sigma == pytest.approx(sigma_t, rel=1e-6)  # sigma_t = n / (2 pi f)
    assert wl.fwhm_from_sigma(sigma) == pytest.approx(fwhm_t, rel=1e-5)  # FWHM = 2 sqrt(2 ln 2) sigma
    assert wl.sigma_from_fwhm(fwhm_t) == pytest.approx(sigma_t, rel=1e-5)  # Cohen (2019)
    spectral = wl.spectral_fwhm_hz(wl.fwhm_from_sigma(sigma))
    assert spectral == pytest.approx(fwhm_f, rel=1e-6)  # spectral FWHM = 4 ln 2 / (pi FWHM_t)
    # sigma_t * sigma_f = 1 / (2 pi) (Gaussian/Fourier identity, common practice)
    assert sigma * (freq / cycles) == pytest.approx(0.1591549, rel=1e-6)


def test_constructed_wavelet_widths():
    # envelope FWHM at fs = 1 kHz is 0.2623469 s (tol 1/fs); |FFT| half-maximum
    # width 3.3607 Hz with 2^18-point zero padding (tol 0.01 Hz). Cohen (2019).
    fs = 1000.0
    sigma = wl.sigma_t_from_cycles(10.0, 7.0)
    psi = wl.morlet_wavelet(10.0, sigma, fs)
    envelope = np.abs(psi)
    above = np.flatnonzero(envelope >= envelope.max() / 2)
    assert (above[-1] - above[0]) / fs == pytest.approx(0.2623469, abs=1 / fs)
    spectrum = np.abs(np.fft.fft(psi, 2**18))
    freqs = np.fft.fftfreq(2**18, 1 / fs)
    band = freqs[spectrum >= spectrum.max() / 2]
    assert band.max() - band.min() == pytest.approx(3.3607, abs=0.01)


def test_envelope_sums_to_two():
    # amplitude-preserving normalisation, sum of |psi| = 2 (common practice, no source)
    psi = wl.morlet_wavelet(10.0, wl.sigma_t_from_cycles(10.0, 7.0), 1000.0)
    assert np.abs(psi).sum() == pytest.approx(2.0, rel=1e-12)
    assert psi.size % 2 == 1


def test_cone_of_influence_halfwidth():
    # e-folding time sqrt(2) sigma_t; 10 Hz, 7 cycles -> 0.1575554 s
    # (Torrence & Compo 1998, Sec. 3g)
    sigma = wl.sigma_t_from_cycles(10.0, 7.0)
    assert wl.cone_halfwidth_s(sigma) == pytest.approx(0.1575554, rel=1e-6)


def test_log_linear_cycles():
    freqs = np.array([2.0, 4.0, 8.0, 16.0])
    cycles = wl.log_linear(freqs, (3.0, 24.0))
    np.testing.assert_allclose(cycles, [3.0, 6.0, 12.0, 24.0])  # log(n) linear in log(f)
    np.testing.assert_allclose(wl.log_linear(freqs, 5.0), 5.0)
    np.testing.assert_allclose(wl.log_linear(freqs, [5.0]), 5.0)  # a one-item list from YAML
    np.testing.assert_allclose(wl.log_linear(freqs, [3, 24]), cycles)


def _one_channel(signal, sample_rate_hz, epoch_start_s=0.0, label="a"):
    data = np.atleast_2d(signal)[:, None, :]
    return Epochs(
        data=data,
        sample_rate_hz=sample_rate_hz,
        epoch_start_s=epoch_start_s,
        channels=("Cz",),
        labels=np.array([label] * data.shape[0]),
    )


def test_sinusoid_amplitude_recovered():
    # x = A cos(2 pi f0 t + 0.7) -> |W| = A at f0 away from edges (analytic; common practice);
    # power = A^2. A = 3 uV, f0 = 10 Hz, 7 cycles. Farther than 5 sigma_t from both edges
    # the wavelet lies wholly inside the epoch.
    fs, amplitude = 1000.0, 3e-6
    t = np.arange(int(4 * fs)) / fs
    epochs = _one_channel(amplitude * np.cos(2 * np.pi * 10.0 * t + 0.7), fs)
    maps = decompose(epochs, subject="s1", conditions={"c": ["a"]}, frequencies_hz=np.array([10.0]), cycles=7.0)
    margin = 5 * wl.sigma_t_from_cycles(10.0, 7.0)
    inside = (t >= margin) & (t <= t[-1] - margin)
    np.testing.assert_allclose(np.sqrt(maps.values[0, 0, 0, inside]), amplitude, rtol=1e-4)
    assert maps.values[0, 0, 0, t.size // 2] == pytest.approx(amplitude**2, rel=2e-4)
    # at the cone-of-influence boundary (sqrt(2) sigma_t from an edge) the wavelet loses
    # Phi(-sqrt 2) = 7.9 % of its envelope: amplitude within 10 % (Torrence & Compo 1998)
    np.testing.assert_allclose(np.sqrt(maps.values[0, 0, 0][maps.valid[0]]), amplitude, rtol=0.1)


def test_fwhm_setting_equals_cycles_setting():
    # the FWHM of a 7-cycle 10 Hz wavelet is 262.3469 ms (Cohen 2019); both settings build it
    fs = 500.0
    rng = np.random.default_rng(3)
    epochs = _one_channel(rng.normal(size=(4, 1000)) * 1e-6, fs)
    kwargs = dict(subject="s1", conditions={"c": ["a"]}, frequencies_hz=np.array([10.0]))
    by_cycles = decompose(epochs, cycles=7.0, **kwargs)
    by_fwhm = decompose(epochs, fwhm_ms=262.3469, **kwargs)
    np.testing.assert_allclose(by_fwhm.values, by_cycles.values, rtol=1e-5)


def test_white_noise_morlet_power_level():
    # Derived (variance of a linear filter of white noise, common practice):
    # E|W|^2 = sigma^2 * sum |psi_k|^2.
    fs, sd = 250.0, 2e-6
    rng = np.random.default_rng(7)
    epochs = _one_channel(rng.normal(0, sd, (200, 500)), fs)
    freqs = np.array([8.0, 16.0, 32.0])
    maps = decompose(epochs, subject="s1", conditions={"c": ["a"]}, frequencies_hz=freqs, cycles=6.0)
    sigma = wl.sigma_t_from_cycles(freqs, 6.0)
    for i, (f, s) in enumerate(zip(freqs, sigma)):
        expected = sd**2 * np.sum(np.abs(wl.morlet_wavelet(f, s, fs)) ** 2)
        measured = maps.values[0, 0, i][maps.valid[i]].mean()
        assert measured == pytest.approx(expected, rel=0.05)
