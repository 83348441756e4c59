"""Voltage maps (decomposition.method 'none'): condition means, baseline, low-pass, decimation, t."""

import numpy as np
import pytest
import scipy.signal
import scipy.stats

from famwise.decomposition import load_maps, voltage_maps
from famwise.design import build_contrast
from famwise.epochs import Epochs
from famwise.errors import UserError
from famwise.settings import AnalysisSettings, ContrastSettings
from famwise.stats import compute

SAMPLE_RATE_HZ = 250.0
CONDITIONS = {"high": ["hi"], "low": ["lo"]}


def _epochs(seed: int, *, effect_uv: float = 0.0, n_epochs: int = 12, n_samples: int = 200) -> Epochs:
    """Random epochs from -200 ms, 3 channels, a late positive wave on channel 2 in 'hi' epochs."""
    rng = np.random.default_rng(seed)
    data = rng.normal(0.0, 5e-6, (n_epochs, 3, n_samples)) + rng.normal(0.0, 2e-6, (n_epochs, 3, 1))
    labels = np.array(["hi", "lo"] * (n_epochs // 2))
    times = -0.2 + np.arange(n_samples) / SAMPLE_RATE_HZ
    wave = np.exp(-0.5 * ((times - 0.4) / 0.08) ** 2) * effect_uv * 1e-6
    data[labels == "hi", 2] += wave
    return Epochs(
        data=data, sample_rate_hz=SAMPLE_RATE_HZ, epoch_start_s=-0.2, channels=("Fz", "Cz", "Pz"), labels=labels
    )


def test_condition_mean_minus_baseline_mean_in_microvolts():
    # source: numpy (np.mean over epochs, then over the baseline samples), common practice, no source
    epochs = _epochs(0)
    maps = voltage_maps(epochs, subject="01", conditions=CONDITIONS, baseline_window_ms=(-200.0, 0.0))
    times = epochs.times
    base = (times >= -0.2 - 1e-12) & (times <= 1e-12)
    for c, label in enumerate(["hi", "lo"]):
        mean = epochs.data[epochs.labels == label].mean(axis=0) * 1e6
        expected = mean - mean[:, base].mean(axis=1, keepdims=True)
        np.testing.assert_allclose(maps.values[c, :, 0, :], expected, rtol=0, atol=1e-5)
    assert maps.values.dtype == np.float32 and maps.freqs.tolist() == [0.0] and maps.measure == "voltage"
    assert maps.valid.shape == (1, times.size) and maps.valid.all()
    assert maps.n_epochs.tolist() == [6, 6]
    assert maps.baseline == "mean from -200 to 0 ms subtracted, per condition"


def test_pooled_baseline_is_trial_weighted():
    # source: numpy, common practice, no source
    epochs = _epochs(1)
    maps = voltage_maps(
        epochs,
        subject="01",
        conditions={"a": ["hi"], "b": ["hi", "lo"]},
        baseline_window_ms=(-100.0, 0.0),
        baseline_pooled=True,
    )
    means = [epochs.data[np.isin(epochs.labels, w)].mean(axis=0) * 1e6 for w in (["hi"], ["hi", "lo"])]
    base = (epochs.times >= -0.1 - 1e-12) & (epochs.times <= 1e-12)
    offset = (6 * means[0][:, base].mean(axis=1) + 12 * means[1][:, base].mean(axis=1)) / 18
    for c in range(2):
        np.testing.assert_allclose(maps.values[c, :, 0], means[c] - offset[:, None], atol=1e-5)


def test_lowpass_and_decimation_equal_scipy_on_every_epoch():
    # source: scipy.signal.sosfiltfilt (butter order 4) and scipy.signal.decimate(ftype="fir", zero_phase=True)
    # applied epoch by epoch, then averaged: the maps filter the average (linear, so equal)
    epochs = _epochs(2)
    maps = voltage_maps(
        epochs, subject="01", conditions=CONDITIONS, time_step_ms=8.0, lowpass_hz=30.0, baseline_mode="none"
    )
    sos = scipy.signal.butter(4, 30.0, btype="low", fs=SAMPLE_RATE_HZ, output="sos")
    start = 50 % 2  # the sample at 0 s (index 50) stays on the 8 ms grid
    for c, label in enumerate(["hi", "lo"]):
        per_epoch = scipy.signal.sosfiltfilt(sos, epochs.data[epochs.labels == label], axis=-1)
        per_epoch = scipy.signal.decimate(per_epoch[..., start:], 2, ftype="fir", zero_phase=True, axis=-1)
        np.testing.assert_allclose(maps.values[c, :, 0], per_epoch.mean(axis=0) * 1e6, atol=1e-5)
    np.testing.assert_allclose(maps.times, epochs.times[start::2])
    assert np.any(np.isclose(maps.times, 0.0))


def test_decimation_is_not_plain_subsampling():
    # an 100 Hz sinusoid sampled at 250 Hz aliases at a 20 ms step (25 Hz Nyquist) unless filtered first:
    # the anti-aliasing decimator leaves a few percent of it, plain sub-sampling keeps all (common practice, no source)
    times = -0.2 + np.arange(500) / SAMPLE_RATE_HZ
    data = np.tile(np.cos(2 * np.pi * 100.0 * times) * 1e-6, (2, 1, 1))
    epochs = Epochs(
        data=data, sample_rate_hz=SAMPLE_RATE_HZ, epoch_start_s=-0.2, channels=("Cz",), labels=np.array(["hi", "hi"])
    )
    maps = voltage_maps(epochs, subject="01", conditions={"high": ["hi"]}, time_step_ms=20.0, baseline_mode="none")
    assert np.abs(maps.values[0, 0, 0, 5:-5]).max() < 0.05
    assert np.abs(data[0, 0, ::5]).max() > 0.9e-6


def test_trimmed_mean_filters_every_epoch_first():
    # source: scipy.stats.trim_mean of the per-epoch scipy.signal.sosfiltfilt output
    epochs = _epochs(3)
    maps = voltage_maps(
        epochs, subject="01", conditions=CONDITIONS, average="trimmed", trim=0.2, lowpass_hz=20.0, baseline_mode="none"
    )
    sos = scipy.signal.butter(4, 20.0, btype="low", fs=SAMPLE_RATE_HZ, output="sos")
    filtered = scipy.signal.sosfiltfilt(sos, epochs.data[epochs.labels == "hi"], axis=-1)
    np.testing.assert_allclose(maps.values[0, :, 0], scipy.stats.trim_mean(filtered, 0.2, axis=0) * 1e6, atol=1e-5)


def test_paired_t_on_voltage_equals_scipy_ttest_rel(tmp_path):
    # source: scipy.stats.ttest_rel on the subjects' baseline-subtracted condition means
    files, expected_hi, expected_lo = [], [], []
    for s in range(6):
        epochs = _epochs(10 + s, effect_uv=4.0)
        maps = voltage_maps(
            epochs, subject=f"{s}", conditions=CONDITIONS, time_step_ms=8.0, baseline_window_ms=(-200.0, 0.0)
        )
        maps.save(tmp_path / f"sub-{s}.npz")
        files.append(tmp_path / f"sub-{s}.npz")
        sos_free = scipy.signal.decimate(epochs.data[..., 0:], 2, ftype="fir", zero_phase=True, axis=-1) * 1e6
        base = maps.times <= 1e-12
        for label, out in (("hi", expected_hi), ("lo", expected_lo)):
            mean = sos_free[epochs.labels == label].mean(axis=0)
            out.append(mean - mean[:, base].mean(axis=1, keepdims=True))
    assert load_maps(files[0]).measure == "voltage"
    settings = ContrastSettings(
        name="late",
        test="paired",
        conditions=("high", "low"),
        subjects=tuple(str(s) for s in range(6)),
        analysis=AnalysisSettings(time_ms=(200.0, 600.0), freq_hz=None, channels=None),
        groups=None,
        covariate=None,
    )
    data = build_contrast(files, settings=settings)
    result = compute(data.x.astype(float), test="paired")
    window = (maps.times >= 0.2 - 1e-9) & (maps.times <= 0.6 + 1e-9)
    reference = scipy.stats.ttest_rel(np.array(expected_hi)[..., window], np.array(expected_lo)[..., window], axis=0)
    np.testing.assert_allclose(result.stat.reshape(3, -1), reference.statistic, rtol=1e-4)
    np.testing.assert_allclose(result.p.reshape(3, -1), reference.pvalue, rtol=1e-3, atol=1e-6)
    assert data.freqs.tolist() == [0.0]
    assert reference.statistic[2].max() > 3.0  # the injected wave is found on Pz


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"lowpass_hz": 200.0, "baseline_mode": "none"}, "Nyquist"),
        ({"lowpass_hz": 40.0, "time_step_ms": 20.0, "baseline_mode": "none"}, "time step"),
        ({}, "needs a baseline window"),
        ({"baseline_mode": "db", "baseline_window_ms": (-200.0, 0.0)}, "baseline mode"),
        ({"baseline_window_ms": (-900.0, 0.0)}, "outside the epoch"),
        ({"time_step_ms": 5.0, "baseline_window_ms": (-200.0, 0.0)}, "multiple of the sample interval"),
    ],
)
def test_bad_options_name_the_subject(options, message):
    with pytest.raises(UserError, match=message) as info:
        voltage_maps(_epochs(0), subject="07", conditions=CONDITIONS, **options)
    assert "subject 07" in str(info.value)
