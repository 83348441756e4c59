"""Report figures of voltage contrasts (points channel x time, no frequency axis).

A voltage contrast stores its maps as (C, 1, T) (`famwise.axes.is_voltage`);
these figures draw time courses and scalp maps and never show a frequency.
`famwise.report.figures` hands voltage contrasts to them.
"""

import matplotlib.pyplot as plt
import numpy as np

from famwise.errors import UserError
from famwise.figure_style import ACCENT, DIVERGING, MUTED, symmetric_limit
from famwise.report.figures import hatch_left_out, peak_channel, stat_label
from famwise.report.results import ReportedContrast, ReportedCorrection
from famwise.report.scalp import topography

_PEAK_COLOR = "#2a4d9b"


def time_course_channels(study: dict) -> list[str] | None:
    """The spec's ``report.time_course_channels`` (study as JSON), or None for each contrast's peak channel."""
    return (study.get("report") or {}).get("time_course_channels") or None


def _course(contrast: ReportedContrast, stat: np.ndarray, shown: np.ndarray, course: list[str] | None):
    """The time course (T,), its significant points (T,) and its title: at the peak or the chosen channels."""
    label = stat_label(contrast)
    if not course:
        channel = peak_channel(contrast)
        return stat[channel], shown[channel], f"{label} at {contrast.channels[channel]} (peak channel)"
    missing = [name for name in course if name not in contrast.channels]
    if missing:
        raise UserError(
            f"report.time_course_channels: {', '.join(missing)} not among contrast {contrast.name}'s channels"
        )
    rows = [contrast.channels.index(name) for name in course]
    if len(rows) == 1:
        return stat[rows[0]], shown[rows[0]], f"{label} at {course[0]} (chosen channel)"
    title = (
        f"{label}, mean over {', '.join(course)}" if len(course) <= 4 else f"{label}, mean of {len(course)} channels"
    )
    return stat[rows].mean(axis=0), shown[rows].any(axis=0), title + "\n(bar: significant at any of them)"


def significant_runs(significant: np.ndarray) -> list[tuple[int, int]]:
    """(first, last) indices of each run of True in a 1-D boolean array, in order."""
    edges = np.diff(np.concatenate([[0], np.asarray(significant, dtype=np.int8), [0]]))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1))


def _span_bars(ax, runs: list[tuple[int, int]], times_ms: np.ndarray) -> None:
    """A bar just under the time axis over each run of time points (half a step beyond its ends)."""
    step = float(np.median(np.diff(times_ms))) if times_ms.size > 1 else 1.0
    ax.tick_params(axis="x", pad=7)
    for first, last in runs:
        ax.plot(
            [times_ms[first] - step / 2, times_ms[last] + step / 2],
            [-0.045, -0.045],
            transform=ax.get_xaxis_transform(),
            color=ACCENT,
            lw=3.5,
            solid_capstyle="butt",
            clip_on=False,
        )


def _channel_image(ax, values: np.ndarray, channels, times_ms: np.ndarray, *, limit: float, fade: np.ndarray):
    """Channels (rows, first on top) x time image of ``values`` (C, T), cells where ``fade`` is True veiled."""
    step = float(np.median(np.diff(times_ms))) if times_ms.size > 1 else 1.0
    extent = (times_ms[0] - step / 2, times_ms[-1] + step / 2, len(channels) - 0.5, -0.5)
    shown = ax.imshow(values, aspect="auto", cmap=DIVERGING, vmin=-limit, vmax=limit, extent=extent)
    if fade.any():
        veil = np.zeros(values.shape + (4,))
        veil[..., :3] = 1.0
        veil[..., 3] = np.where(fade, 0.6, 0.0)
        ax.imshow(veil, aspect="auto", extent=extent)
    ticks = np.unique(np.linspace(0, len(channels) - 1, min(len(channels), 12)).round().astype(int))
    ax.set_yticks(ticks)
    ax.set_yticklabels([channels[i] for i in ticks], fontsize=6)
    ax.set_xlabel("time (ms)")
    return shown


def voltage_map_figure(
    contrast: ReportedContrast, mask: np.ndarray, *, title: str, subtitle: str, course: list[str] | None = None
):
    """A correction's (or the uncorrected) significant points on one voltage contrast.

    Top: the statistic's time course at the peak channel (or at the
    ``course`` channels, averaged), a bar under the axis over each span
    significant there (at any of them). Bottom: the statistic over channels x
    time, points not significant faded, points left out hatched.

    Parameters
    ----------
    contrast : ReportedContrast
        Maps of shape (C, 1, T).
    mask : ndarray of bool, shape (C, 1, T)
    title, subtitle : str
    course : list of str, optional
        The spec's ``report.time_course_channels``; None for the peak channel.
    """
    times_ms = contrast.times * 1000.0
    stat, shown = contrast.stat[:, 0], mask[:, 0]
    trace, spans, course_title = _course(contrast, stat, shown, course)
    label = stat_label(contrast)
    figure, (top, bottom) = plt.subplots(
        2, 1, figsize=(3.5, 4.9), sharex=True, layout="constrained", height_ratios=[1.0, 1.4]
    )
    figure.suptitle(f"{title}\n{subtitle}", x=0.02, ha="left", fontsize=9)
    top.axhline(0, color=MUTED, lw=0.6)
    top.plot(times_ms, trace, color=ACCENT, lw=1.3)
    _span_bars(top, significant_runs(spans), times_ms)
    top.set_title(course_title, fontsize=8, fontweight="normal")
    top.set_ylabel(label)
    image = _channel_image(bottom, stat, contrast.channels, times_ms, limit=symmetric_limit(stat), fade=~shown)
    left_out = contrast.left_out is not None and contrast.left_out.any()
    if left_out:
        hatch_left_out(bottom, contrast.left_out[:, 0], times_ms)
    bottom.set_title(
        "all channels, not significant faded" + (" (hatched: left out)" if left_out else ""),
        fontsize=8,
        fontweight="normal",
    )
    figure.colorbar(image, ax=bottom, label=label, shrink=0.9)
    return figure


def voltage_cluster_figure(
    contrast: ReportedContrast,
    correction: ReportedCorrection,
    row: dict,
    points: np.ndarray,
    flat: np.ndarray,
    *,
    unit: str,
):
    """Two views of one cluster of a voltage contrast: time courses, and the scalp map over its time window.

    Parameters
    ----------
    contrast, correction : the cluster's contrast and correction
    row : dict
        The cluster's row of ``clusters.tsv`` (no frequency columns).
    points : ndarray of bool, shape (C, 1, T)
        The cluster's points.
    flat : ndarray of float, shape (C, 2)
        Projected channel positions.
    unit : str
        Unit of the effect (µV).
    """
    noun = correction.table_noun
    names = {c for c in str(row["channels"]).split(",") if c}
    members = np.array([c in names for c in contrast.channels])
    if not members.any():
        members = points.any(axis=(1, 2))
    times_ms = contrast.times * 1000.0
    effect = contrast.effect[:, 0]
    peak = contrast.channels.index(row["peak_channel"]) if row["peak_channel"] in contrast.channels else 0
    start_ms, end_ms = float(row["time_start_ms"]), float(row["time_end_ms"])
    figure, (course_ax, scalp_ax) = plt.subplots(1, 2, figsize=(8.6, 3.0), layout="constrained", width_ratios=[1.3, 1])
    figure.suptitle(
        f"{contrast.name}, {correction.name}: {noun} {row['id']} at {start_ms:.0f} to {end_ms:.0f} ms "
        f"(p = {float(row['p']):.4g})",
        x=0.01,
        ha="left",
        fontsize=9,
        fontweight="bold",
    )
    course_ax.axhline(0, color=MUTED, lw=0.6)
    course_ax.plot(times_ms, effect[members].mean(axis=0), color=ACCENT, lw=1.3, label=f"mean of the {noun}'s channels")
    course_ax.plot(
        times_ms, effect[peak], color=_PEAK_COLOR, lw=1.0, ls="--", label=f"{contrast.channels[peak]} (peak)"
    )
    in_window = (times_ms >= start_ms - 1e-6) & (times_ms <= end_ms + 1e-6)
    _span_bars(course_ax, significant_runs(in_window), times_ms)
    course_ax.legend(frameon=False, fontsize=7)
    course_ax.set_title(f"time course (bar under the axis: the {noun}'s time span)", fontsize=8, fontweight="normal")
    course_ax.set_xlabel("time (ms)")
    course_ax.set_ylabel(f"effect ({unit})")
    scalp = effect[:, in_window].mean(axis=1)
    shown = topography(scalp_ax, scalp, flat, limit=symmetric_limit(scalp), marked=members)
    scalp_ax.set_title(
        f"effect, mean over {start_ms:.0f} to {end_ms:.0f} ms\n(filled dots: the {noun}'s channels)",
        fontsize=8,
        fontweight="normal",
    )
    figure.colorbar(shown, ax=scalp_ax, label=f"effect ({unit})", shrink=0.8)
    return figure
