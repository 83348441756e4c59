"""Inter-trial phase coherence: exact values and the null expectation (circular statistics; Mardia & Jupp 2000)."""

import numpy as np
import pytest
from scipy.stats import directional_stats

from famwise.decomposition import decompose
from famwise.epochs import Epochs


def _itpc(phases, *, n_samples=1000, fs=500.0, freqs=(10.0,)):
    t = np.arange(n_samples) / fs
    data = np.cos(2 * np.pi * 10.0 * t[None, :] + np.asarray(phases)[:, None]) * 1e-6
    epochs = Epochs(
        data=data[:, None, :],
        sample_rate_hz=fs,
        epoch_start_s=0.0,
        channels=("Pz",),
        labels=np.array(["a"] * len(phases)),
    )
    return decompose(
        epochs, subject="s1", conditions={"c": ["a"]}, frequencies_hz=np.array(freqs), cycles=7.0, measure="itpc"
    )


def test_identical_phases_give_one():
    maps = _itpc([0.4] * 6)  # identical phases -> ITPC = 1 (Mardia & Jupp 2000)
    np.testing.assert_allclose(maps.values[0, 0, 0], 1.0, atol=1e-5)
    assert maps.measure == "itpc"


def test_five_phase_example():
    phases = np.array([0.1, 0.5, -0.3, 2.0, 1.0])
    maps = _itpc(phases)
    # 0.7170492, equal to scipy.stats.directional_stats(...).mean_resultant_length
    expected = directional_stats(np.c_[np.cos(phases), np.sin(phases)]).mean_resultant_length
    assert expected == pytest.approx(0.7170492, rel=1e-6)
    assert maps.values[0, 0, 0, 500] == pytest.approx(expected, abs=1e-4)


def test_opposite_phases_give_zero():
    maps = _itpc([0.0, np.pi / 2, np.pi, 3 * np.pi / 2])  # four quadrature phases -> 0 (Mardia & Jupp 2000)
    assert abs(maps.values[0, 0, 0, 500]) < 1e-4


def test_random_phases_null_expectation():
    # Rayleigh limit (Mardia & Jupp 2000): uniform random phases over N epochs give
    # mean ITPC ~ sqrt(pi) / (2 sqrt(N)) (rel tol 2 % for N >= 20) and mean ITPC^2 = 1/N (1 %).
    # White noise has independent uniform phases per epoch; many cells average the estimate.
    n = 40
    rng = np.random.default_rng(17)
    fs = 500.0
    data = rng.normal(size=(n, 48, 3000))
    epochs = Epochs(
        data=data,
        sample_rate_hz=fs,
        epoch_start_s=0.0,
        channels=tuple(f"E{i}" for i in range(48)),
        labels=np.array(["a"] * n),
    )
    maps = decompose(
        epochs,
        subject="s1",
        conditions={"c": ["a"]},
        frequencies_hz=np.array([20.0, 60.0, 100.0, 140.0, 180.0, 220.0]),
        cycles=3.0,
        measure="itpc",
        time_step_ms=40.0,
    )
    values = maps.values[0][:, maps.valid].astype(float)
    assert values.mean() == pytest.approx(np.sqrt(np.pi) / (2 * np.sqrt(n)), rel=0.02)
    assert (values**2).mean() == pytest.approx(1 / n, rel=0.01)
    assert values.min() >= 0 and values.max() <= 1
