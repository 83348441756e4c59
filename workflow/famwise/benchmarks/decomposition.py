"""Benchmark: one subject's Morlet decomposition, famwise against the naive convolution loop."""

import json
import subprocess
import sys
import time

import numpy as np

from famwise.benchmarks import BenchRow

_FULL = {"epochs": 300, "channels": 64, "seconds": 2.5, "sample_rate_hz": 500.0, "freqs": 40, "reference_channels": 1}
_QUICK = {"epochs": 60, "channels": 8, "seconds": 2.5, "sample_rate_hz": 500.0, "freqs": 20, "reference_channels": 1}
_TARGET = 5.0


def _synthetic_epochs(size: dict):
    """Noise plus a 10 Hz burst after the event, two conditions, seeded."""
    from famwise.epochs import Epochs

    rng = np.random.default_rng(20240601)
    n_samples = int(round(size["seconds"] * size["sample_rate_hz"]))
    times = -0.5 + np.arange(n_samples) / size["sample_rate_hz"]
    data = rng.normal(0.0, 5e-6, (size["epochs"], size["channels"], n_samples))
    data += 3e-6 * np.sin(2 * np.pi * 10.0 * times) * ((times > 0.2) & (times < 0.8))
    labels = np.array(["left", "right"] * (size["epochs"] // 2) + ["left"] * (size["epochs"] % 2))
    return Epochs(
        data=data,
        sample_rate_hz=size["sample_rate_hz"],
        epoch_start_s=-0.5,
        channels=tuple(f"E{i + 1}" for i in range(size["channels"])),
        labels=labels,
    )


def _settings(size: dict) -> dict:
    from famwise.decomposition import frequency_grid

    return {
        "frequencies_hz": frequency_grid(2.0, 45.0, size["freqs"], "log"),
        "method": "morlet",
        "cycles": (3.0, 10.0),
        "measure": "power",
    }


def run_famwise(quick: bool) -> dict:
    """Decompose the synthetic subject with famwise; wall time (s) and peak RSS (MB).

    Run in a fresh process by `bench_decomposition`, so the peak resident set
    size (``resource.getrusage(...).ru_maxrss``) covers only this work, the
    interpreter and the subject's data.
    """
    import resource

    from famwise.decomposition import decompose

    size = _QUICK if quick else _FULL
    epochs = _synthetic_epochs(size)
    start = time.perf_counter()
    decompose(epochs, subject="bench", conditions={"left": ["left"], "right": ["right"]}, **_settings(size))
    seconds = time.perf_counter() - start
    return {"seconds": seconds, "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}


def bench_decomposition(quick: bool) -> BenchRow:
    """Time famwise's decomposition against `famwise.naive.decomposition.naive_decomposition`.

    Full size: 300 epochs x 64 channels x 2.5 s at 500 Hz x 40 frequencies
    (Morlet, 3 to 10 cycles, 2-45 Hz, total power, two conditions). Quick:
    60 epochs x 8 channels x 2.5 s x 20 frequencies. The reference runs on
    one channel and is extrapolated linearly to all channels.
    """
    size = _QUICK if quick else _FULL
    code = (
        "import json, sys; from famwise.benchmarks.decomposition import run_famwise; "
        f"print(json.dumps(run_famwise({quick!r})))"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    measured = json.loads(done.stdout.strip().splitlines()[-1])

    from famwise.decomposition import wavelets
    from famwise.naive.decomposition import naive_decomposition

    epochs = _synthetic_epochs(size)
    settings = _settings(size)
    freqs = settings["frequencies_hz"]
    sigma = wavelets.sigma_t_from_cycles(freqs, wavelets.log_linear(freqs, settings["cycles"]))
    kernels = [wavelets.morlet_wavelet(f, s, size["sample_rate_hz"])[None, :] for f, s in zip(freqs, sigma)]
    n_ref = size["reference_channels"]
    start = time.perf_counter()
    for name in ("left", "right"):
        subset = epochs.data[epochs.labels == name][:, :n_ref]
        naive_decomposition(subset, kernels, measure="power", scale=1.0, keep=slice(0, epochs.data.shape[-1], 1))
    reference_s = (time.perf_counter() - start) * size["channels"] / n_ref

    famwise_s = measured["seconds"]
    ratio = reference_s / famwise_s
    return BenchRow(
        task="time-frequency decomposition (Morlet power, one subject)",
        size=(
            f"{size['epochs']} epochs x {size['channels']} channels x {size['seconds']:g} s at "
            f"{size['sample_rate_hz']:g} Hz x {size['freqs']} frequencies"
        ),
        famwise_s=famwise_s,
        reference_s=reference_s,
        target=f">= {_TARGET:g}x",
        met=ratio >= _TARGET,
        peak_memory_mb=measured["peak_mb"],
        note=(
            f"reference (one scipy.signal.fftconvolve per epoch, channel and frequency) timed on "
            f"{n_ref} channel(s), extrapolated linearly to {size['channels']}; famwise timed in "
            "a fresh process, peak memory = its ru_maxrss (interpreter and input data included)"
        ),
    )
