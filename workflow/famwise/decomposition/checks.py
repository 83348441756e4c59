"""Input checks of `famwise.decomposition.decompose`: its options, the epochs each condition keeps, finite samples."""

import numpy as np

from famwise.decomposition import baseline as _baseline
from famwise.epochs import Epochs
from famwise.errors import UserError

METHODS = ("morlet", "multitaper")
MEASURES = ("power", "induced", "itpc")
AVERAGES = ("mean", "trimmed")


def check_options(
    epochs,
    *,
    subject,
    freqs,
    method,
    cycles,
    fwhm_ms,
    taper_length_ms,
    nw,
    measure,
    average,
    trim,
    baseline_mode,
    baseline_window_ms,
    baseline_pooled,
    baseline_single_epoch,
    conditions,
) -> None:
    """Raise UserError for settings that cannot work, before any computation."""
    who = f"subject {subject}:"
    for setting, value, allowed in (
        ("method", method, METHODS),
        ("measure", measure, MEASURES),
        ("average", average, AVERAGES),
        ("baseline mode", baseline_mode, _baseline.MODES),
    ):
        if value not in allowed:
            raise UserError(f"{who} {setting} must be one of {list(allowed)}, got {value!r}")
    if not conditions:
        raise UserError(f"{who} no conditions were given")
    nyquist = epochs.sample_rate_hz / 2.0
    if freqs.ndim != 1 or freqs.size == 0 or np.any(freqs <= 0) or np.any(np.diff(freqs) <= 0) or freqs[-1] >= nyquist:
        raise UserError(
            f"{who} frequencies must be increasing, positive and below the Nyquist "
            f"frequency {nyquist:g} Hz, got {np.round(freqs, 3).tolist()}"
        )
    if method == "morlet":
        if (cycles is None) == (fwhm_ms is None):
            raise UserError(
                f"{who} Morlet wavelets need exactly one of cycles or fwhm_ms, "
                f"got cycles={cycles!r} and fwhm_ms={fwhm_ms!r}"
            )
        width = cycles if cycles is not None else fwhm_ms
        label = "cycles" if cycles is not None else "fwhm_ms"
        values = np.atleast_1d(np.asarray(width, dtype=float))
        if values.size not in (1, 2) or np.any(values <= 0):
            raise UserError(
                f"{who} {label} must be a positive number or a pair of positive "
                f"numbers (lowest, highest frequency), got {width!r}"
            )
    else:
        if taper_length_ms is None or nw is None or taper_length_ms <= 0 or nw < 1:
            raise UserError(
                f"{who} multitaper needs taper_length_ms > 0 and nw >= 1, "
                f"got taper_length_ms={taper_length_ms!r} and nw={nw!r}"
            )
    if average == "trimmed" and not 0 <= trim < 0.5:
        raise UserError(f"{who} trim must be in [0, 0.5), got {trim!r}")
    if measure == "itpc" and (method != "morlet" or baseline_mode != "none" or average != "mean"):
        raise UserError(
            f"{who} ITPC needs method 'morlet', baseline mode 'none' and average "
            f"'mean', got {method!r}, {baseline_mode!r} and {average!r}"
        )
    if baseline_mode != "none" and baseline_window_ms is None:
        raise UserError(f"{who} baseline mode {baseline_mode!r} needs a baseline window (ms)")
    if baseline_pooled and baseline_single_epoch:
        raise UserError(
            f"{who} a pooled baseline and single-epoch baselines exclude each "
            "other: single-epoch normalisation uses each epoch's own baseline"
        )


def select_epochs(epochs: Epochs, *, subject, conditions, min_epochs) -> list[np.ndarray]:
    """Epoch indices of each condition, checked against ``min_epochs``."""
    labels = np.asarray(epochs.labels).astype(str)
    members = []
    for name, wanted in conditions.items():
        idx = np.flatnonzero(np.isin(labels, [str(w) for w in wanted]))
        if idx.size == 0:
            raise UserError(
                f"subject {subject}: no epochs for condition {name!r} (labels "
                f"{list(wanted)}); the epochs carry the labels "
                f"{sorted(set(labels.tolist()))}"
            )
        if idx.size < min_epochs:
            raise UserError(
                f"subject {subject}: condition {name!r} has {idx.size} epochs, fewer than the minimum of {min_epochs}"
            )
        members.append(idx)
    return members


def check_finite(epochs: Epochs, used: np.ndarray, *, subject) -> None:
    """Raise naming the first epoch and channel that holds NaN or infinite samples."""
    for epoch in used:
        bad = ~np.isfinite(epochs.data[epoch])
        if bad.any():
            channel = epochs.channels[int(np.flatnonzero(bad.any(axis=-1))[0])]
            raise UserError(
                f"subject {subject}: epoch {epoch} (label "
                f"{str(epochs.labels[epoch])!r}), channel {channel} holds NaN or "
                "infinite samples"
            )
