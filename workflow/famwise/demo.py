"""The example study: invented data with a real injected effect, written as BIDS-EEG.

The scenario (example_study/README.md): the Harbor Street lab's "lantern"
working-memory task. Participants keep two (low load) or six (high load)
lantern colours in mind; frontal-midline theta power rises with load between
about 300 and 900 ms after the array, and a slow late positive wave over
parietal channels (peak 600 ms) is larger for high load. Seventeen
participants, one excluded. ``study.yaml`` tests the theta power,
``voltage.yaml`` the late positive wave (voltage maps, no decomposition).
"""

import shutil
from importlib import resources
from pathlib import Path

import numpy as np

from famwise import bids_writing

CHANNELS = [
    "Fp1",
    "Fp2",
    "AF3",
    "AF4",
    "F7",
    "F3",
    "Fz",
    "F4",
    "F8",
    "FC5",
    "FC1",
    "FC2",
    "FC6",
    "T7",
    "C3",
    "Cz",
    "C4",
    "T8",
    "CP5",
    "CP1",
    "CP2",
    "CP6",
    "P7",
    "P3",
    "Pz",
    "P4",
    "P8",
    "PO3",
    "PO4",
    "O1",
    "Oz",
    "O2",
]
# Share of the frontal-midline theta source seen at each channel (the rest see none).
THETA_WEIGHTS = {
    "Fz": 1.0,
    "FC1": 0.8,
    "FC2": 0.8,
    "F3": 0.6,
    "F4": 0.6,
    "Cz": 0.5,
    "AF3": 0.4,
    "AF4": 0.4,
    "Fp1": 0.2,
    "Fp2": 0.2,
    "C3": 0.2,
    "C4": 0.2,
    "CP1": 0.15,
    "CP2": 0.15,
}
ALPHA_WEIGHTS = {
    "O1": 1.0,
    "Oz": 1.0,
    "O2": 1.0,
    "PO3": 0.8,
    "PO4": 0.8,
    "P3": 0.5,
    "Pz": 0.6,
    "P4": 0.5,
    "P7": 0.4,
    "P8": 0.4,
}
# Share of the late positive wave seen at each channel: parietal and occipital channels that carry no theta.
LATE_WEIGHTS = {
    "Pz": 1.0,
    "P3": 0.75,
    "P4": 0.75,
    "PO3": 0.6,
    "PO4": 0.6,
    "P7": 0.35,
    "P8": 0.35,
    "Oz": 0.35,
    "CP5": 0.3,
    "CP6": 0.3,
}
LATE_UV = {"high": 4.0, "low": 1.5}
"""Amplitude of the late positive wave per epoch label, microvolts (times the participant's gain)."""
LATE_PEAK_S, LATE_SD_S = 0.6, 0.2
"""Centre and SD of the wave's Gaussian time course, s (spectral SD 0.8 Hz: below the 4-30 Hz maps)."""
SAMPLE_RATE_HZ = 250.0
EPOCHS_PER_CONDITION = 40
EVENT_SPACING_S = 3.0
N_PARTICIPANTS = 17
EXCLUDED = "07"
SEED = 20261201


def data_complete(folder: Path) -> bool:
    """Whether ``folder`` already holds the example study's complete data (`write_demo` then writes nothing)."""
    return (Path(folder) / "data" / ".complete").exists() and (Path(folder) / "study.yaml").exists()


def write_demo(folder: Path, *, fmt: str = "edf", resolution_uv: float | None = None) -> Path:
    """Write the example study (spec + BIDS data) into ``folder``; return the spec path.

    Parameters
    ----------
    folder : Path
    fmt : {"edf", "bdf", "vhdr"}
        Format of the recordings (``famwise demo`` writes EDF).
    resolution_uv : float, optional
        Store whole multiples of this step (µV), so that two formats hold the
        same integer samples (`famwise.bids_writing.write_subject`).
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    spec = folder / "study.yaml"
    for name, packaged in (("study.yaml", "example_study.yaml"), ("voltage.yaml", "example_voltage.yaml")):
        if not (folder / name).exists():
            with resources.as_file(resources.files("famwise") / "data" / packaged) as source:
                shutil.copyfile(source, folder / name)
    root = folder / "data"
    marker = root / ".complete"
    written = "written by famwise demo (theta and late positive wave)\n" + (
        "" if (fmt, resolution_uv) == ("edf", None) else f"as {fmt}, resolution {resolution_uv} uV\n"
    )
    if marker.exists() and marker.read_text() == written:
        return spec
    if root.exists():
        shutil.rmtree(root)
    rng = np.random.default_rng(SEED)
    rows = []
    for number in range(1, N_PARTICIPANTS + 1):
        subject = f"{number:02d}"
        data, events = simulate_recording(rng, gain=float(rng.normal(1.0, 0.25)), artefacts=subject == "03")
        bids_writing.write_subject(
            root,
            subject,
            data=data,
            sample_rate_hz=SAMPLE_RATE_HZ,
            channels=CHANNELS,
            events=events,
            task="lantern",
            fmt=fmt,
            resolution_uv=resolution_uv,
        )
        rows.append({"participant_id": f"sub-{subject}", "age": str(int(rng.integers(19, 36))), "handedness": "R"})
    bids_writing.write_participants(root, rows)
    marker.write_text(written)
    return spec


def simulate_recording(rng: np.random.Generator, *, gain: float, artefacts: bool) -> tuple[np.ndarray, list]:
    """One participant's continuous recording and events.

    Returns
    -------
    data : ndarray, shape (n_channels, n_samples), volts
    events : list of (onset s, duration s, trial_type)
    """
    labels = np.array(["low"] * EPOCHS_PER_CONDITION + ["high"] * EPOCHS_PER_CONDITION)
    rng.shuffle(labels)
    onsets = 2.0 + EVENT_SPACING_S * np.arange(labels.size) + rng.uniform(-0.2, 0.2, labels.size)
    n_samples = int((onsets[-1] + 3.0) * SAMPLE_RATE_HZ)
    times = np.arange(n_samples) / SAMPLE_RATE_HZ
    data = _background(rng, len(CHANNELS), n_samples)
    alpha = _narrowband(rng, n_samples, 10.0, 1.5) * 6e-6
    for name, weight in ALPHA_WEIGHTS.items():
        data[CHANNELS.index(name)] += weight * alpha
    theta = np.zeros(n_samples)
    for onset, label in zip(onsets, labels):
        amplitude = (4.0 if label == "high" else 1.5) * gain * 1e-6
        relative = times - onset
        window = np.abs(relative - 0.6) < 1.0
        envelope = np.exp(-0.5 * ((relative[window] - 0.6) / 0.18) ** 2)
        theta[window] += amplitude * envelope * np.cos(2 * np.pi * 6.0 * relative[window] + rng.uniform(0, 2 * np.pi))
    for name, weight in THETA_WEIGHTS.items():
        data[CHANNELS.index(name)] += weight * theta
    late = _late_wave(times, onsets, labels, gain)
    for name, weight in LATE_WEIGHTS.items():
        data[CHANNELS.index(name)] += weight * late
    if artefacts:
        for onset in onsets[rng.choice(labels.size, 4, replace=False)]:
            start = int((onset + 0.3) * SAMPLE_RATE_HZ)
            data[:2, start : start + 40] += 250e-6 * np.hanning(40)
    events = [(float(onset), 0.0, str(label)) for onset, label in zip(onsets, labels)]
    return data, events


def _late_wave(times: np.ndarray, onsets: np.ndarray, labels: np.ndarray, gain: float) -> np.ndarray:
    """The late positive wave after every event, volts, shape (n_samples,); it draws no random numbers."""
    late = np.zeros(times.size)
    for onset, label in zip(onsets, labels):
        late += LATE_UV[str(label)] * gain * 1e-6 * np.exp(-0.5 * ((times - onset - LATE_PEAK_S) / LATE_SD_S) ** 2)
    return late


def _background(rng: np.random.Generator, n_channels: int, n_samples: int) -> np.ndarray:
    """Spatially smeared 1/f noise, about 8 microvolts RMS, volts."""
    spectrum = rng.normal(size=(n_channels, n_samples // 2 + 1)) + 1j * rng.normal(
        size=(n_channels, n_samples // 2 + 1)
    )
    freqs = np.fft.rfftfreq(n_samples, 1 / SAMPLE_RATE_HZ)
    spectrum /= np.sqrt(np.maximum(freqs, 1.0))
    noise = np.fft.irfft(spectrum, n=n_samples, axis=1)
    mixing = 0.6 * np.eye(n_channels) + 0.4 / n_channels
    noise = mixing @ noise
    return noise / noise.std() * 8e-6


def _narrowband(rng: np.random.Generator, n_samples: int, centre_hz: float, width_hz: float) -> np.ndarray:
    """Unit-RMS noise band-limited around ``centre_hz``."""
    spectrum = rng.normal(size=n_samples // 2 + 1) + 1j * rng.normal(size=n_samples // 2 + 1)
    freqs = np.fft.rfftfreq(n_samples, 1 / SAMPLE_RATE_HZ)
    spectrum *= np.exp(-0.5 * ((freqs - centre_hz) / width_hz) ** 2)
    signal = np.fft.irfft(spectrum, n=n_samples)
    return signal / signal.std()
