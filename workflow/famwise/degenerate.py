"""Degenerate points: where a contrast's statistic is undefined, found before any inference.

A point is degenerate when

- any subject's value there is NaN or inf, or
- the test's variance estimate there is zero or negligible:
  ``variance <= (TOLERANCE * scale) ** 2`` with ``scale`` the largest finite
  |value| of the whole map (all subjects and points) and ``TOLERANCE`` 1e-6.
  The variance is, per test: the subjects' variance (one-sample, paired,
  correlation, weighted); the largest of the groups' variances (two-sample,
  between-groups: the point is degenerate only when every group is); the residual variance after
  removing subject and condition means (repeated measures). Or
- the statistic itself is not finite there (e.g. a correlation of exactly +-1,
  or a Winsorized variance of zero for Yuen's t).

The observed stage stops with :func:`describe` or leaves the points out of the
family (``inference.degenerate_points``).
"""

import numpy as np

from famwise.axes import is_voltage

TOLERANCE = 1e-6
"""Relative size of a negligible standard deviation (a multiple of the map's largest |value|)."""

_LISTED = 6  # channels or subjects named in a message before "and k more"


def degenerate_points(x: np.ndarray, *, test: str, groups=None, stat=None) -> np.ndarray:
    """Mask of the degenerate points of a contrast's data.

    Parameters
    ----------
    x : ndarray, shape (n, P) or (n, k, P)
        The subjects' values (repeated measures: per condition).
    test : str
        The contrast's test name.
    groups : ndarray of int (n,) or None
        Two-sample group indices (0, 1).
    stat : ndarray (P,) or None
        The observed statistic; its non-finite points are degenerate too.

    Returns
    -------
    ndarray of bool, shape (P,)
    """
    x = np.asarray(x, dtype=np.float64)
    nonfinite = ~np.isfinite(x)
    bad = nonfinite.reshape(-1, x.shape[-1]).any(axis=0)
    finite = np.where(nonfinite, 0.0, x)
    scale = float(np.abs(finite).max()) if finite.size else 0.0
    bad |= test_variance(finite, test=test, groups=groups) <= (TOLERANCE * scale) ** 2
    if stat is not None:
        bad |= ~np.isfinite(np.asarray(stat, dtype=np.float64).reshape(-1))
    return bad


def test_variance(x: np.ndarray, *, test: str, groups=None) -> np.ndarray:
    """The variance each test's statistic divides by, per point (P,); see the module docstring."""
    if test == "repeated-measures":
        residual = x - x.mean(axis=1, keepdims=True) - x.mean(axis=0, keepdims=True) + x.mean(axis=(0, 1))
        return (residual**2).mean(axis=(0, 1))
    if test in ("two-sample", "between-groups"):
        groups = np.asarray(groups)
        return np.max([x[groups == g].var(axis=0) for g in np.unique(groups)], axis=0)
    return x.var(axis=0)


def describe(mask: np.ndarray, *, x: np.ndarray, test: str, subjects, channels, freqs, times, groups=None) -> str:
    """One line: how many degenerate points, where, and their likely cause.

    Parameters
    ----------
    mask : ndarray of bool, shape (C, F, T) or (P,)
    x, test, groups
        As in :func:`degenerate_points`.
    subjects, channels : sequence of str
    freqs : ndarray, Hz
    times : ndarray, s
    """
    grid = np.asarray(mask, dtype=bool).reshape(len(channels), len(freqs), len(times))
    count = int(grid.sum())
    return (
        f"{count} point{'s' if count != 1 else ''} of {grid.size} where the statistic is undefined "
        f"({location(grid, channels=channels, freqs=freqs, times=times)}); likely cause: "
        f"{likely_cause(grid.reshape(-1), x=x, test=test, subjects=subjects, groups=groups)}"
    )


def location(grid: np.ndarray, *, channels, freqs, times) -> str:
    """Where the points of a (C, F, T) mask lie, e.g. ``"Fz, Cz; 4-6 Hz; 200-480 ms"`` (the ranges they span;
    no band for voltage maps, `famwise.axes.is_voltage`)."""
    c, f, t = np.nonzero(grid)
    names = [str(channels[i]) for i in np.unique(c)]
    band = "" if is_voltage(freqs) else f"{_span(np.asarray(freqs)[np.unique(f)], 'Hz', '{:g}')}; "
    return f"{_listed(names, 'channels')}; {band}{_span(np.asarray(times)[np.unique(t)] * 1e3, 'ms', '{:.0f}')}"


def likely_cause(mask: np.ndarray, *, x: np.ndarray, test: str, subjects, groups=None) -> str:
    """The most likely reason the points of ``mask`` (P,) are degenerate, in words."""
    x = np.asarray(x, dtype=np.float64)[..., mask]
    per_subject = ~np.isfinite(x).reshape(x.shape[0], -1).all(axis=1)
    if per_subject.any():
        names = [str(s) for s in np.asarray(subjects)[per_subject]]
        return (
            f"NaN or inf in the map{'s' if len(names) > 1 else ''} of subject{'s' if len(names) > 1 else ''} "
            f"{_listed(names, 'subjects')}"
        )
    if test == "repeated-measures":
        return "no variance left after removing each subject's and each condition's mean"
    if test in ("two-sample", "between-groups"):
        groups = np.asarray(groups)
        same = all(np.ptp(x[groups == g], axis=0).max() == 0 for g in np.unique(groups))
        return "values identical within each group" if same else "variance negligible within every group"
    if np.ptp(x, axis=0).max() == 0:
        return "values identical in all subjects"
    if test == "correlation" and np.ptp(x, axis=0).min() > 0:
        return "a correlation of exactly +-1 (or a variance negligible relative to the data's scale)"
    return f"variance negligible relative to the data's scale (below ({TOLERANCE:g} x the largest |value|)^2)"


def blank(x: np.ndarray, left_out: np.ndarray | None) -> np.ndarray:
    """``x`` with every subject's value at the left-out points set to 0 (a copy only when any is left out).

    The permutation engine runs on the blanked data, so NaN never enters its
    sums; the left-out points' statistics are set aside afterwards anyway.
    """
    if left_out is None or not left_out.any():
        return x
    blanked = np.array(x, copy=True)
    blanked[..., np.asarray(left_out).reshape(-1)] = 0
    return blanked


def _listed(names: list[str], what: str) -> str:
    if len(names) <= _LISTED:
        return ", ".join(names)
    return f"{', '.join(names[:_LISTED])} and {len(names) - _LISTED} more {what}"


def _span(values: np.ndarray, unit: str, form: str) -> str:
    low, high = form.format(float(values.min())), form.format(float(values.max()))
    return f"{low} {unit}" if low == high else f"{low}-{high} {unit}"
