"""Contrasts: per-subject time-frequency maps -> the data one group test needs.

The analysis restriction (channels, frequency band, time window) is applied
here, so points outside it are neither tested nor counted in any family.
"""

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.errors import UserError
from famwise.settings import ContrastSettings
from famwise.spec.base import did_you_mean
from famwise.spec.contrast_design import contrast_weights


@dataclass(frozen=True)
class ContrastData:
    """The subject-level data of one contrast, restricted to the analysis region.

    Attributes
    ----------
    x : ndarray, float32
        (n_subjects, n_points): each subject's weighted sum of its condition
        maps (`weighted_sum`: the condition itself, paired differences A-B,
        the weighted contrast); (n_subjects, n_conditions, n_points) for
        repeated measures. Points flatten (n_channels, n_freqs, n_times).
    test : str
        The spec's test name.
    subjects : tuple of str
    channels : tuple of str
    freqs : ndarray, Hz
    times : ndarray, s
    groups : ndarray of int (n_subjects,) or None
        Index of each subject's group in the contrast's list (two-sample,
        between-groups).
    covariate : ndarray of float (n_subjects,) or None
        Per-subject covariate (correlation; regression: the tested covariate, coded).
    nuisance : ndarray of float64 (n_subjects, q) or None
        Regression: each subject's coded nuisance columns (q may be 0).
    nuisance_columns, design_terms : tuple of str
        Regression: the nuisance columns' names and how each covariate was
        coded (`famwise.stats.coding.CodedDesign`).
    """

    x: np.ndarray
    test: str
    subjects: tuple[str, ...]
    channels: tuple[str, ...]
    freqs: np.ndarray
    times: np.ndarray
    groups: np.ndarray | None = None
    covariate: np.ndarray | None = None
    nuisance: np.ndarray | None = None
    nuisance_columns: tuple[str, ...] = ()
    design_terms: tuple[str, ...] = ()

    @property
    def shape(self) -> tuple[int, int, int]:
        """(n_channels, n_freqs, n_times) of the tested points."""
        return (len(self.channels), len(self.freqs), len(self.times))

    def save(self, path: Path) -> None:
        """Write ``contrasts/<c>/subjects.npz`` atomically."""
        extra = {}
        if self.groups is not None:
            extra["groups"] = self.groups
        if self.covariate is not None:
            extra["covariate"] = self.covariate
        if self.nuisance is not None:
            extra["nuisance"] = self.nuisance
            extra["nuisance_columns"] = np.array(self.nuisance_columns, dtype=str)
            extra["design_terms"] = np.array(self.design_terms, dtype=str)
        save_npz(
            path,
            x=self.x,
            test=self.test,
            subjects=np.array(self.subjects),
            channels=np.array(self.channels),
            freqs=self.freqs,
            times=self.times,
            **extra,
        )


def load_contrast(path: Path) -> ContrastData:
    """Read a file written by :meth:`ContrastData.save`."""
    with np.load(path, allow_pickle=False) as archive:
        return ContrastData(
            x=archive["x"],
            test=str(archive["test"]),
            subjects=tuple(str(s) for s in archive["subjects"]),
            channels=tuple(str(c) for c in archive["channels"]),
            freqs=archive["freqs"],
            times=archive["times"],
            groups=archive["groups"] if "groups" in archive.files else None,
            covariate=archive["covariate"] if "covariate" in archive.files else None,
            nuisance=archive["nuisance"] if "nuisance" in archive.files else None,
            nuisance_columns=_strings(archive, "nuisance_columns"),
            design_terms=_strings(archive, "design_terms"),
        )


def _strings(archive, key: str) -> tuple[str, ...]:
    return tuple(str(s) for s in archive[key]) if key in archive.files else ()


def build_contrast(
    files: list[Path], *, settings: ContrastSettings, sampling_rates: list[float | None] | None = None
) -> ContrastData:
    """Stack the subjects' maps for one contrast, restricted to the analysis region.

    Parameters
    ----------
    files : list of path
        ``tf/sub-<id>.npz`` of each subject, in the order of ``settings.subjects``.
    settings : ContrastSettings
        The test, its conditions (paired: first minus second), the subjects,
        the analysis region, and each subject's group index (0/1) or
        covariate value when the test uses one.
    sampling_rates : list of float or None, optional
        Sampling rate (Hz) each subject's maps were computed from; must agree.
    """
    from famwise.decomposition import load_maps  # numba-backed package: only the contrast stage needs it

    subjects, test, analysis = settings.subjects, settings.test, settings.analysis
    _check_rates(sampling_rates or [], subjects)
    maps = [load_maps(Path(f)) for f in files]
    _check_consistent(maps, subjects)
    first = maps[0]
    channel_index = _channel_index(first.channels, analysis.channels)
    freq_index = _freq_index(first.freqs, analysis.freq_hz)
    time_index = _time_index(first.times, first.valid[freq_index], first.freqs[freq_index], analysis.time_ms)
    region = np.ix_(channel_index, freq_index, time_index)

    def condition_values(tf, subject: str, name: str) -> np.ndarray:
        if name not in tf.conditions:
            raise UserError(f"subject {subject}: condition '{name}' has no maps (found: {', '.join(tf.conditions)})")
        return tf.values[tf.conditions.index(name)][region].reshape(-1)

    stacks = [np.stack([condition_values(tf, s, c) for c in settings.conditions]) for tf, s in zip(maps, subjects)]
    data = np.stack(stacks).astype(np.float64)  # (n, k, P)
    if test == "repeated-measures":
        x = data
    else:
        x = weighted_sum(data, contrast_weights(test, len(settings.conditions), settings.weights))
    return ContrastData(
        x=np.ascontiguousarray(x, dtype=np.float32),
        test=test,
        subjects=tuple(subjects),
        channels=tuple(first.channels[i] for i in channel_index),
        freqs=first.freqs[freq_index],
        times=first.times[time_index],
        groups=None if settings.groups is None else np.asarray(settings.groups, dtype=np.int64),
        covariate=None if settings.covariate is None else np.asarray(settings.covariate, dtype=np.float64),
        **_regression_design(settings),
    )


def _regression_design(settings: ContrastSettings) -> dict:
    """The nuisance columns of a regression contrast (empty for other tests)."""
    if settings.test != "regression":
        return {}
    n = len(settings.subjects)
    return {
        "nuisance": np.asarray(settings.nuisance or (), dtype=np.float64).reshape(n, -1),
        "nuisance_columns": tuple(settings.nuisance_columns or ()),
        "design_terms": tuple(settings.design_terms or ()),
    }


def weighted_sum(data: np.ndarray, weights) -> np.ndarray:
    """Each subject's sum of w_j times condition j, conditions added in order, float64 (n, P).

    The first term is w_0 x_0 (exactly x_0 for weight 1) and each further
    term is added, so weights (1,) and (1, -1) give the condition itself and
    the difference x_0 - x_1 bit for bit.
    """
    total = weights[0] * data[:, 0]
    for j in range(1, len(weights)):
        total = total + weights[j] * data[:, j]
    return total


def _check_rates(rates: list[float | None], subjects: list[str]) -> None:
    known = [(rate, subject) for rate, subject in zip(rates, subjects) if rate is not None]
    for rate, subject in known[1:]:
        if abs(rate - known[0][0]) > 1e-9:
            raise UserError(
                f"subject {subject}: sampling rate {rate:g} Hz differs from subject {known[0][1]} ({known[0][0]:g} Hz); resample the recordings to one rate"
            )


def _check_consistent(maps: list, subjects: list[str]) -> None:
    first, reference = maps[0], subjects[0]
    for tf, subject in zip(maps[1:], subjects[1:]):
        if tf.channels != first.channels:
            extra = sorted(set(tf.channels) - set(first.channels))
            missing = sorted(set(first.channels) - set(tf.channels))
            detail = (
                f"extra: {', '.join(extra) or 'none'}; missing: {', '.join(missing) or 'none'}"
                if extra or missing
                else "same names in a different order"
            )
            raise UserError(f"subject {subject}: channels differ from subject {reference} ({detail})")
        if tf.freqs.shape != first.freqs.shape or not np.allclose(tf.freqs, first.freqs):
            raise UserError(f"subject {subject}: frequencies differ from subject {reference}")
        if tf.times.shape != first.times.shape or not np.allclose(tf.times, first.times):
            raise UserError(
                f"subject {subject}: time grid differs from subject {reference} "
                f"({tf.times[0]:.3f} to {tf.times[-1]:.3f} s in {tf.times.size} steps vs "
                f"{first.times[0]:.3f} to {first.times[-1]:.3f} s in {first.times.size}; check sampling rates and epoch windows)"
            )
        if tf.measure != first.measure:
            raise UserError(
                f"subject {subject}: measure '{tf.measure}' differs from subject {reference} ('{first.measure}')"
            )


def _channel_index(channels: tuple[str, ...], wanted: list[str] | None) -> np.ndarray:
    if not wanted:
        return np.arange(len(channels))
    lookup = {c.lower(): i for i, c in enumerate(channels)}
    index = []
    for name in wanted:
        if name.lower() not in lookup:
            raise UserError(
                f"analysis.channels: unknown channel '{name}'{did_you_mean(name, channels)} (the data have {len(channels)} channels: {', '.join(channels[:12])}{', ...' if len(channels) > 12 else ''})"
            )
        index.append(lookup[name.lower()])
    return np.array(index)


def _freq_index(freqs: np.ndarray, band: list[float] | None) -> np.ndarray:
    if band is None:
        return np.arange(freqs.size)
    index = np.flatnonzero((freqs >= band[0] - 1e-9) & (freqs <= band[1] + 1e-9))
    if index.size == 0:
        raise UserError(
            f"analysis.freq_hz: no decomposed frequency lies in [{band[0]}, {band[1]}] Hz (frequencies: {freqs.min():.3g} to {freqs.max():.3g} Hz)"
        )
    return index


def _time_index(times: np.ndarray, valid: np.ndarray, freqs: np.ndarray, window_ms: list[float] | None) -> np.ndarray:
    """Time points of the analysis window; every cell must be free of edge effects.

    Without ``window_ms`` the window starts at the event (0 ms) and ends where
    the edge-free data end; a window given is used as given.
    """
    usable = valid.all(axis=0)
    if not usable.any():
        raise UserError(
            f"analysis: no time point is free of edge effects at {freqs.min():.3g} Hz; use longer epochs or shorter wavelets"
        )
    first, last = np.flatnonzero(usable)[[0, -1]]
    fits = f"[{times[first] * 1e3:.0f}, {times[last] * 1e3:.0f}] ms"
    if window_ms is None:  # from the event (0 ms) to where the edge-free data end: the baseline is not tested
        after = np.flatnonzero(usable & (times >= -1e-9))
        if after.size == 0:
            raise UserError(
                f"analysis: no time point at or after the event (0 ms) is free of edge effects at "
                f"{freqs.min():.3g} Hz (the edge-free window is {fits}); give analysis.time_ms"
            )
        return np.arange(after[0], last + 1)
    inside = (times >= window_ms[0] / 1e3 - 1e-9) & (times <= window_ms[1] / 1e3 + 1e-9)
    index = np.flatnonzero(inside)
    if index.size == 0:
        raise UserError(
            f"analysis.time_ms: no time point lies in [{window_ms[0]}, {window_ms[1]}] ms (maps cover {times[0] * 1e3:.0f} to {times[-1] * 1e3:.0f} ms)"
        )
    if not usable[index].all():
        worst = freqs[np.argmin(valid[:, index].sum(axis=1))]
        raise UserError(
            f"analysis.time_ms: [{window_ms[0]}, {window_ms[1]}] ms reaches into the edge-affected cells "
            f"(cone of influence) at {worst:.3g} Hz; the widest window that fits is {fits}"
        )
    return index
