"""Baseline normalisation: arithmetic, and how decompose applies it."""

import numpy as np
import pytest
from scipy.stats import trim_mean

from famwise.decomposition import baseline as bl
from famwise.decomposition import decompose
from famwise.epochs import Epochs
from famwise.errors import FamwiseWarning


@pytest.mark.parametrize(
    ("ratio", "db", "percent"),
    [  # common practice; Cohen 2014, ch. 18 (from memory)
        (2.0, 3.0103000, 100.0),
        (10.0, 10.0, 900.0),
        (0.5, -3.0103000, -50.0),
        (1.5, 1.7609126, 50.0),
        (1.0, 0.0, 0.0),
    ],
)
def test_db_percent_ratio(ratio, db, percent):
    power, mean, sd = np.array([ratio * 4.0]), np.array([4.0]), np.array([np.nan])
    assert bl.normalise(power, mean, sd, mode="db")[0] == pytest.approx(db, rel=1e-7, abs=1e-12)
    assert bl.normalise(power, mean, sd, mode="percent")[0] == pytest.approx(percent, abs=1e-9)
    assert bl.normalise(power, mean, sd, mode="ratio")[0] == pytest.approx(ratio, rel=1e-12)
    # identity dB = 10 log10(1 + pct/100) (common practice, no source)
    assert 10 * np.log10(1 + percent / 100) == pytest.approx(db, rel=1e-7, abs=1e-12)


def test_zscore_uses_sample_sd():
    # common practice, no source: base [1..5], P = 7 -> ddof 1: 2.5298221 (ddof 0 would give 2.8284271)
    power = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 7.0])
    mean, sd = bl.baseline_stats(power, np.arange(6) < 5)
    assert bl.normalise(power, mean, sd, mode="zscore")[-1] == pytest.approx(2.5298221, rel=1e-7)


def test_constant_map_at_baseline_gives_zero():
    # common practice, no source: a map equal to its baseline gives 0 in dB, percent and z (ratio 1)
    power = np.full((2, 6), 3.0)
    power[:, ::2] += 1e-3  # some spread so the SD is not zero
    window = np.ones(6, dtype=bool)
    mean, sd = bl.baseline_stats(power, window)
    for mode in ("db", "percent", "zscore"):
        assert np.all(np.abs(bl.normalise(mean, mean, sd, mode=mode)) < 1e-12)
    assert np.all(bl.normalise(mean, mean, sd, mode="ratio") == 1.0)


def test_describe():
    assert (
        bl.describe("db", (-400, -100), pooled=False, single_epoch=False)
        == "dB change from -400 to -100 ms, per condition"
    )
    assert bl.describe("none", None, pooled=False, single_epoch=False) == "none"
    assert "pooled" in bl.describe("zscore", (-400, -100), pooled=True, single_epoch=False)


def _two_conditions(seed=0):
    rng = np.random.default_rng(seed)
    fs = 250.0
    data = rng.normal(0, 1e-6, (24, 2, 500))
    t = -1.0 + np.arange(500) / fs
    data[:12] += 2e-6 * np.sin(2 * np.pi * 10 * t) * (t > 0.2)  # condition A gains 10 Hz power
    labels = np.array(["a"] * 12 + ["b"] * 12)
    return Epochs(data=data, sample_rate_hz=fs, epoch_start_s=-1.0, channels=("C3", "C4"), labels=labels)


_COMMON = dict(
    subject="s1",
    conditions={"A": ["a"], "B": ["b"]},
    frequencies_hz=np.array([8.0, 10.0]),
    cycles=4.0,
    time_step_ms=20.0,
)


@pytest.mark.parametrize("mode", ["db", "percent", "zscore", "ratio"])
def test_decompose_baseline_equals_hand_formula(mode):
    epochs = _two_conditions()
    raw = decompose(epochs, **_COMMON).values.astype(float)
    out = decompose(epochs, **_COMMON, baseline_mode=mode, baseline_window_ms=(-500.0, -200.0))
    ms = out.times * 1000
    window = (ms >= -500 - 1e-6) & (ms <= -200 + 1e-6)
    base = raw[..., window]
    mean, sd = base.mean(-1, keepdims=True), base.std(-1, ddof=1, keepdims=True)
    expected = {
        "db": 10 * np.log10(raw / mean),
        "percent": 100 * (raw - mean) / mean,
        "zscore": (raw - mean) / sd,
        "ratio": raw / mean,
    }[mode]  # Cohen 2014, ch. 18 (from memory)
    np.testing.assert_allclose(out.values, expected, rtol=2e-4, atol=2e-4)


def test_pooled_baseline_uses_trial_weighted_average():
    epochs = _two_conditions()
    keep = np.r_[0:12, 12:18]  # A 12 epochs, B 6 epochs
    epochs = Epochs(
        epochs.data[keep], epochs.sample_rate_hz, epochs.epoch_start_s, epochs.channels, epochs.labels[keep]
    )
    raw = decompose(epochs, **_COMMON).values.astype(float)
    out = decompose(epochs, **_COMMON, baseline_mode="ratio", baseline_window_ms=(-500.0, -200.0), baseline_pooled=True)
    ms = out.times * 1000
    window = (ms >= -500 - 1e-6) & (ms <= -200 + 1e-6)
    pooled = (12 * raw[0] + 6 * raw[1]) / 18
    expected = raw / pooled[..., window].mean(-1, keepdims=True)[None]
    np.testing.assert_allclose(out.values, expected, rtol=1e-4)
    assert out.baseline == "ratio from -500 to -200 ms, pooled over conditions"


def test_single_trial_baseline_then_trimmed_mean():
    from famwise.decomposition import wavelets as wl
    from famwise.naive.decomposition import naive_decomposition

    epochs = _two_conditions(1)
    out = decompose(
        epochs,
        **_COMMON,
        baseline_mode="db",
        baseline_window_ms=(-500.0, -200.0),
        baseline_single_epoch=True,
        average="trimmed",
        trim=0.2,
    )
    freqs = _COMMON["frequencies_hz"]
    kernels = [
        wl.morlet_wavelet(f, s, epochs.sample_rate_hz)[None] for f, s in zip(freqs, wl.sigma_t_from_cycles(freqs, 4.0))
    ]
    keep = slice(0, 500, 5)
    ms = out.times * 1000
    window = (ms >= -500 - 1e-6) & (ms <= -200 + 1e-6)
    for c, label in enumerate(["a", "b"]):
        epoch_maps = np.stack(
            [
                naive_decomposition(epochs.data[[i]], kernels, measure="power", scale=1.0, keep=keep)
                for i in np.flatnonzero(epochs.labels == label)
            ]
        )
        db = 10 * np.log10(
            epoch_maps / epoch_maps[..., window].mean(-1, keepdims=True)
        )  # dB of each epoch (common practice, no source)
        expected = trim_mean(db, 0.2, axis=0)  # scipy.stats.trim_mean
        np.testing.assert_allclose(out.values[c], expected, atol=2e-4)
    assert "own baseline" in out.baseline


def test_baseline_in_edge_zone_warns():
    epochs = _two_conditions()
    with pytest.warns(FamwiseWarning, match=r"reaches into the edge zone .* \[8.0, 10.0\] Hz"):
        decompose(epochs, **_COMMON, baseline_mode="db", baseline_window_ms=(-1000.0, -700.0))
