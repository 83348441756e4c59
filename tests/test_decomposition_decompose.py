"""decompose: fast path against the naive loop, grids, edges, files and bad input."""

import importlib

import numpy as np
import pytest

from famwise.decomposition import TimeFreqMaps, decompose, frequency_grid, load_maps
from famwise.decomposition import multitaper as mt
from famwise.decomposition import wavelets as wl
from famwise.epochs import Epochs
from famwise.errors import UserError
from famwise.naive.decomposition import naive_decomposition

decompose_module = importlib.import_module("famwise.decomposition.decompose")
FS = 250.0


def _epochs(n_epochs=20, n_channels=3, n_samples=400, epoch_start_s=-0.5, seed=0):
    rng = np.random.default_rng(seed)
    labels = np.array(["x", "y", "z", "y"] * n_epochs)[:n_epochs]
    return Epochs(
        data=rng.normal(0, 1e-5, (n_epochs, n_channels, n_samples)),
        sample_rate_hz=FS,
        epoch_start_s=epoch_start_s,
        channels=tuple(f"E{i}" for i in range(n_channels)),
        labels=labels,
    )


FREQS = frequency_grid(5.0, 40.0, 6, "log")
CONDITIONS = {"X": ["x"], "YZ": ["y", "z"]}


def _kernels(method, cycles=(3.0, 8.0), taper_length_ms=400.0, nw=2.0):
    if method == "morlet":
        sigma = wl.sigma_t_from_cycles(FREQS, wl.log_linear(FREQS, cycles))
        return [wl.morlet_wavelet(f, s, FS)[None] for f, s in zip(FREQS, sigma)], 1.0
    half = int(round(taper_length_ms * FS / 2000))
    tapers, _ = mt.dpss_tapers(2 * half + 1, nw)
    return [mt.multitaper_kernels(f, tapers, FS) for f in FREQS], mt.psd_scale(FS)


@pytest.mark.parametrize(
    ("method", "measure"),
    [
        ("morlet", "power"),
        ("morlet", "induced"),
        ("morlet", "itpc"),
        ("multitaper", "power"),
        ("multitaper", "induced"),
    ],
)
def test_fast_path_equals_reference_loop(method, measure):
    epochs = _epochs()
    options = dict(cycles=(3.0, 8.0)) if method == "morlet" else dict(taper_length_ms=400.0, nw=2.0)
    maps = decompose(
        epochs,
        subject="s1",
        conditions=CONDITIONS,
        frequencies_hz=FREQS,
        method=method,
        measure=measure,
        time_step_ms=8.0,
        **options,
    )
    kernels, scale = _kernels(method)
    keep = slice(1, 400, 2)  # 8 ms steps through t = 0 (sample 125)
    for c, labels in enumerate(CONDITIONS.values()):
        subset = epochs.data[np.isin(epochs.labels, labels)]
        expected = naive_decomposition(subset, kernels, measure=measure, scale=scale, keep=keep)
        tol = 2e-5 if measure == "itpc" else 2e-6
        np.testing.assert_allclose(maps.values[c], expected, rtol=tol, atol=tol * np.abs(expected).max())
    np.testing.assert_array_equal(maps.n_epochs, [5, 15])
    assert maps.times[0] == pytest.approx(-0.496) and np.any(np.isclose(maps.times, 0.0))


def test_block_size_and_channel_order_do_not_matter(monkeypatch):
    epochs = _epochs()
    kwargs = dict(subject="s1", conditions=CONDITIONS, frequencies_hz=FREQS, cycles=5.0)
    whole = decompose(epochs, **kwargs)
    monkeypatch.setattr(decompose_module, "BLOCK_BYTES", 1)  # one frequency per block
    blocked = decompose(epochs, **kwargs)
    # FFT lengths follow the blocks, so only rounding (single precision) may differ
    np.testing.assert_allclose(blocked.values, whole.values, rtol=1e-5)
    reordered = Epochs(epochs.data[:, ::-1], FS, epochs.epoch_start_s, epochs.channels[::-1], epochs.labels)
    np.testing.assert_allclose(decompose(reordered, **kwargs).values[:, ::-1], whole.values, rtol=1e-6)


def test_condition_sharing_a_label_and_progress():
    epochs = _epochs()
    messages = []
    maps = decompose(
        epochs,
        subject="s1",
        conditions={"Y": ["y"], "Yz": ["y", "z"]},
        frequencies_hz=FREQS,
        cycles=5.0,
        progress=messages.append,
    )
    alone = decompose(epochs, subject="s1", conditions={"Y": ["y"]}, frequencies_hz=FREQS, cycles=5.0)
    np.testing.assert_array_equal(maps.values[0], alone.values[0])
    assert maps.conditions == ("Y", "Yz") and maps.channels == epochs.channels
    assert messages[-1] == "subject s1: channel 3/3 (E2) done" and len(messages) == 3


def test_cone_of_influence_mask():
    # Morlet: invalid within sqrt(2) sigma_t of an edge (Torrence & Compo 1998, Sec. 3g)
    epochs = _epochs(n_samples=500, epoch_start_s=0.0)
    maps = decompose(epochs, subject="s1", conditions=CONDITIONS, frequencies_hz=np.array([10.0]), cycles=7.0)
    halfwidth = np.sqrt(2) * 7 / (2 * np.pi * 10)  # 0.1575554 s (Torrence & Compo 1998)
    t = maps.times
    np.testing.assert_array_equal(maps.valid[0], (t >= halfwidth) & (t <= t[-1] - halfwidth))
    # multitaper: half the window (our choice)
    maps = decompose(
        epochs,
        subject="s1",
        conditions=CONDITIONS,
        frequencies_hz=np.array([10.0]),
        method="multitaper",
        taper_length_ms=400.0,
        nw=2.0,
    )
    np.testing.assert_array_equal(maps.valid[0], (t >= 0.2 - 1e-9) & (t <= t[-1] - 0.2 + 1e-9))
    assert maps.valid_span_ms(10.0, 10.0) == pytest.approx((200.0, 1796.0))


def test_frequency_grid():
    np.testing.assert_allclose(frequency_grid(2.0, 32.0, 5, "log"), [2, 4, 8, 16, 32])
    np.testing.assert_allclose(frequency_grid(2.0, 10.0, 5, "linear"), [2, 4, 6, 8, 10])
    with pytest.raises(UserError, match="spacing must be one of"):
        frequency_grid(2.0, 10.0, 5, "octave")
    with pytest.raises(UserError, match="0 < start < stop, got start 10 Hz and stop 2 Hz"):
        frequency_grid(10.0, 2.0, 5, "log")
    with pytest.raises(UserError, match="at least 1, got 0"):
        frequency_grid(2.0, 10.0, 0, "log")


def test_save_and_load_round_trip(tmp_path):
    maps = decompose(
        _epochs(),
        subject="s1",
        conditions=CONDITIONS,
        frequencies_hz=FREQS,
        cycles=4.0,
        baseline_mode="db",
        baseline_window_ms=(-300.0, -100.0),
    )
    path = tmp_path / "sub-s1.npz"
    maps.save(path)
    back = load_maps(path)
    assert isinstance(back, TimeFreqMaps)
    np.testing.assert_array_equal(back.values, maps.values)
    np.testing.assert_array_equal(back.valid, maps.valid)
    assert back.conditions == maps.conditions and back.channels == maps.channels
    assert back.baseline == "dB change from -300 to -100 ms, per condition"
    assert back.measure == "power" and back.n_epochs.tolist() == [5, 15]
    assert [p.name for p in tmp_path.iterdir()] == ["sub-s1.npz"]  # no temporary left


def test_load_rejects_bad_files(tmp_path):
    with pytest.raises(UserError, match=r"time-frequency file .*missing.npz does not exist"):
        load_maps(tmp_path / "missing.npz")
    (tmp_path / "junk.npz").write_text("not a zip")
    with pytest.raises(UserError, match=r"junk.npz is not a readable NPZ file"):
        load_maps(tmp_path / "junk.npz")
    good = dict(
        values=np.zeros((2, 3, 4, 5), np.float32),
        conditions=np.array(["a", "b"]),
        channels=np.array(["C3", "C4", "Cz"]),
        freqs=np.arange(1.0, 5.0),
        times=np.linspace(0, 1, 5),
        measure=np.array("power"),
        baseline=np.array("none"),
        n_epochs=np.array([10, 12]),
    )
    np.savez(tmp_path / "lacks.npz", **{k: v for k, v in good.items() if k != "times"})
    with pytest.raises(UserError, match=r"lacks.npz lacks the keys \['times'\]"):
        load_maps(tmp_path / "lacks.npz")
    np.savez(tmp_path / "shape.npz", **{**good, "channels": np.array(["C3"])})
    with pytest.raises(UserError, match=r"shape.npz: 'channels' must have shape \(3,\)"):
        load_maps(tmp_path / "shape.npz")
    np.savez(tmp_path / "valid.npz", **good, valid=np.ones((4, 4), bool))
    with pytest.raises(UserError, match=r"valid.npz: 'valid' must have shape \(4, 5\)"):
        load_maps(tmp_path / "valid.npz")
    np.savez(tmp_path / "dims.npz", **{**good, "values": np.zeros((2, 3, 4))})
    with pytest.raises(UserError, match=r"dims.npz: 'values' must be a float array"):
        load_maps(tmp_path / "dims.npz")
    np.savez(tmp_path / "freqs.npz", **{**good, "freqs": np.array([1.0, 3.0, 2.0, 4.0])})
    with pytest.raises(UserError, match=r"freqs.npz: 'freqs' must be positive and increasing"):
        load_maps(tmp_path / "freqs.npz")
    values = good["values"].copy()
    values[0, 0, 0, 0] = np.nan
    np.savez(tmp_path / "nan.npz", **{**good, "values": values})
    with pytest.raises(UserError, match=r"nan.npz: 'values' holds NaN"):
        load_maps(tmp_path / "nan.npz")
    np.savez(tmp_path / "ok.npz", **good)  # 'valid' is optional
    assert load_maps(tmp_path / "ok.npz").valid.all()


def _bad(match, epochs=None, **changes):
    kwargs = dict(subject="s7", conditions=CONDITIONS, frequencies_hz=FREQS, cycles=4.0)
    kwargs.update(changes)
    with pytest.raises(UserError, match=match):
        decompose(_epochs() if epochs is None else epochs, **kwargs)


def test_condition_errors():
    _bad(r"subject s7: condition 'X' has 5 epochs, fewer than the minimum of 8", min_epochs=8)
    _bad(
        r"subject s7: no epochs for condition 'Q' \(labels \['q'\]\); the epochs carry the "
        r"labels \['x', 'y', 'z'\]",
        conditions={"Q": ["q"]},
    )
    _bad("subject s7: no conditions were given", conditions={})


def test_data_errors():
    epochs = _epochs()
    epochs.data[6, 2, 17] = np.inf
    _bad(r"subject s7: epoch 6 \(label 'z'\), channel E2 holds NaN or infinite samples", epochs)


def test_edge_errors():
    _bad(
        r"subject s7: baseline window -700 to -100 ms lies outside the epoch \(-500 to 1096 ms\)",
        baseline_mode="db",
        baseline_window_ms=(-700.0, -100.0),
    )
    _bad(
        r"subject s7: baseline window -300 to -300 ms lies outside the epoch",
        baseline_mode="db",
        baseline_window_ms=(-300.0, -300.0),
    )
    _bad(
        r"subject s7: baseline window -301 to -298 ms holds 0 output time points, db needs",
        baseline_mode="db",
        baseline_window_ms=(-301.0, -298.0),
        time_step_ms=8.0,
    )
    _bad(
        r"subject s7: the Morlet wavelet at \[5.0\] Hz reaches up to 1350 ms to each side, "
        r"longer than the epoch \(-500 to 1096 ms, 1596 ms\) allows",
        cycles=30.0,
        frequencies_hz=np.array([5.0, 20.0]),
    )
    _bad(
        r"subject s7: the multitaper window at \[5.0, 20.0\] Hz reaches up to 1000 ms",
        method="multitaper",
        cycles=None,
        taper_length_ms=2000.0,
        nw=2.0,
        frequencies_hz=np.array([5.0, 20.0]),
    )


@pytest.mark.parametrize(
    ("changes", "match"),
    [
        (dict(method="stft"), r"subject s7: method must be one of \['morlet', 'multitaper'\], got 'stft'"),
        (dict(measure="phase"), r"measure must be one of \['power', 'induced', 'itpc'\]"),
        (dict(average="median"), r"average must be one of \['mean', 'trimmed'\]"),
        (dict(baseline_mode="log"), r"baseline mode must be one of"),
        (
            dict(frequencies_hz=np.array([10.0, 5.0])),
            r"frequencies must be increasing, positive and below "
            r"the Nyquist frequency 125 Hz",
        ),
        (dict(frequencies_hz=np.array([10.0, 130.0])), r"below the Nyquist frequency 125 Hz"),
        (dict(fwhm_ms=300.0), r"exactly one of cycles or fwhm_ms, got cycles=4.0 and fwhm_ms=300.0"),
        (dict(cycles=None), r"exactly one of cycles or fwhm_ms"),
        (dict(cycles=(3.0, -1.0)), r"cycles must be a positive number or a pair"),
        (
            dict(method="multitaper", taper_length_ms=None, nw=2.0),
            r"multitaper needs taper_length_ms > 0 and nw >= 1, got taper_length_ms=None",
        ),
        (dict(method="multitaper", taper_length_ms=400.0, nw=0.5), r"nw >= 1"),
        (dict(average="trimmed", trim=0.5), r"trim must be in \[0, 0.5\), got 0.5"),
        (
            dict(measure="itpc", baseline_mode="db", baseline_window_ms=(-300.0, -100.0)),
            r"ITPC needs method 'morlet', baseline mode 'none' and average 'mean'",
        ),
        (dict(baseline_mode="zscore"), r"baseline mode 'zscore' needs a baseline window \(ms\)"),
        (
            dict(
                baseline_mode="db",
                baseline_window_ms=(-300.0, -100.0),
                baseline_pooled=True,
                baseline_single_epoch=True,
            ),
            r"a pooled baseline and single-epoch baselines exclude",
        ),
        (
            dict(time_step_ms=5.0),
            r"time_step_ms must be a positive multiple of the sample interval "
            r"\(4 ms at 250 Hz\), got 5",
        ),
        (
            dict(baseline_mode="zscore", baseline_window_ms=(-300.0, -290.0), time_step_ms=8.0),
            r"holds 1 output time points, zscore needs at least 2",
        ),
    ],
)
def test_option_errors(changes, match):
    _bad(match, **changes)
