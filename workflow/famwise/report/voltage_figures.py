"""Report figures of voltage maps (points channel x time, no frequency axis).

A voltage contrast stores its maps as (C, 1, T) (`famwise.axes.is_voltage`);
these figures draw time courses and scalp maps and never show a frequency.
"""

import matplotlib.pyplot as plt
import numpy as np

from famwise.figure_style import ACCENT, DIVERGING, MUTED, symmetric_limit
from famwise.report.results import ReportedContrast, ReportedCorrection
from famwise.report.scalp import topography

_SPAN = "#e8e2d0"


def _spans(ax, significant: np.ndarray, times_ms: np.ndarray) -> None:
    """Shade each run of significant time points (half a step beyond its first and last sample)."""
    step = float(np.median(np.diff(times_ms))) if times_ms.size > 1 else 1.0
    edges = np.diff(np.concatenate([[0], significant.astype(np.int8), [0]]))
    for start, stop in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)):
        ax.axvspan(times_ms[start] - step / 2, times_ms[stop - 1] + step / 2, color=_SPAN, lw=0)


def _channel_image(ax, values: np.ndarray, channels, times_ms: np.ndarray, *, limit: float, fade=None):
    """Channels (rows) x time image of ``values`` (C, T), non-significant cells faded when ``fade`` is given."""
    step = float(np.median(np.diff(times_ms))) if times_ms.size > 1 else 1.0
    extent = (times_ms[0] - step / 2, times_ms[-1] + step / 2, len(channels) - 0.5, -0.5)
    image = ax.imshow(
        values, aspect="auto", cmap=DIVERGING, vmin=-limit, vmax=limit, extent=extent, interpolation="nearest"
    )
    if fade is not None and fade.any():
        ax.imshow(
            np.where(fade, 1.0, np.nan),
            aspect="auto",
            cmap="Greys",
            vmin=0,
            vmax=1.6,
            alpha=0.55,
            extent=extent,
            interpolation="nearest",
        )
    ticks = np.unique(np.linspace(0, len(channels) - 1, min(len(channels), 12)).round().astype(int))
    ax.set_yticks(ticks)
    ax.set_yticklabels([channels[i] for i in ticks], fontsize=6)
    ax.set_xlabel("time (ms)")
    return image


def voltage_map_figure(
    contrast: ReportedContrast, mask: np.ndarray, *, channel: int, stat_label: str, title: str, subtitle: str
):
    """Significant points of a voltage contrast.

    Top: the statistic's time course at ``channel`` (the selected or peak
    channel), its significant span shaded. Bottom: the statistic over
    channels x time, points not significant faded.

    Parameters
    ----------
    contrast : ReportedContrast
        Maps of shape (C, 1, T).
    mask : ndarray of bool, shape (C, 1, T)
    channel : int
        Channel of the time course.
    stat_label, title, subtitle : str
    """
    times_ms = contrast.times * 1000.0
    stat, shown = contrast.stat[:, 0], mask[:, 0]
    figure, (top, bottom) = plt.subplots(
        2, 1, figsize=(3.5, 4.9), sharex=True, layout="constrained", height_ratios=[1.0, 1.4]
    )
    figure.suptitle(f"{title}\n{subtitle}", x=0.02, ha="left", fontsize=9)
    _spans(top, shown[channel], times_ms)
    top.axhline(0, color=MUTED, lw=0.6)
    top.plot(times_ms, stat[channel], color=ACCENT, lw=1.3)
    top.set_title(
        f"{stat_label} at {contrast.channels[channel]} (shaded: significant)", fontsize=8, fontweight="normal"
    )
    top.set_ylabel(stat_label)
    image = _channel_image(bottom, stat, contrast.channels, times_ms, limit=symmetric_limit(stat), fade=~shown)
    bottom.set_title("all channels, not significant faded", fontsize=8, fontweight="normal")
    figure.colorbar(image, ax=bottom, label=stat_label, shrink=0.9)
    return figure


def voltage_cluster_figure(
    contrast: ReportedContrast,
    correction: ReportedCorrection,
    row: dict,
    points: np.ndarray,
    flat: np.ndarray,
    *,
    unit: str,
    noun: str,
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
    unit, noun : str
        Unit of the effect (µV) and "cluster" or "region".
    """
    names = {c for c in str(row["channels"]).split(",") if c}
    members = np.array([c in names for c in contrast.channels])
    if not members.any():
        members = points.any(axis=(1, 2))
    times_ms = contrast.times * 1000.0
    effect = contrast.effect[:, 0]
    peak = contrast.channels.index(str(row["peak_channel"])) if str(row["peak_channel"]) in contrast.channels else 0
    figure, (course_ax, scalp_ax) = plt.subplots(
        1, 2, figsize=(8.6, 3.0), layout="constrained", width_ratios=[1.3, 1.0]
    )
    figure.suptitle(
        f"{contrast.name} · {correction.name} · {noun} {row['id']} (p = {float(row['p']):.4g}, "
        f"{int(row['n_points'])} points, {members.sum()} channels)",
        x=0.01,
        ha="left",
        fontsize=9,
        fontweight="bold",
    )
    course_ax.axhline(0, color=MUTED, lw=0.6)
    course_ax.axvspan(float(row["time_start_ms"]), float(row["time_end_ms"]), color=_SPAN, lw=0)
    course_ax.plot(times_ms, effect[members].mean(axis=0), color=ACCENT, lw=1.3, label=f"{noun} channels")
    course_ax.plot(times_ms, effect[peak], color="#2a4d9b", lw=1.0, ls="--", label=f"{contrast.channels[peak]} (peak)")
    course_ax.legend(frameon=False, fontsize=7)
    course_ax.set_title(f"time course (shaded: the {noun}'s time span)", fontsize=8, fontweight="normal")
    course_ax.set_xlabel("time (ms)")
    course_ax.set_ylabel(f"effect ({unit})")
    window = (times_ms >= float(row["time_start_ms"]) - 1e-6) & (times_ms <= float(row["time_end_ms"]) + 1e-6)
    scalp = effect[:, window].mean(axis=1)
    shown = topography(scalp_ax, scalp, flat, limit=symmetric_limit(scalp), marked=members)
    scalp_ax.set_title(
        f"effect, mean over {float(row['time_start_ms']):.0f} to {float(row['time_end_ms']):.0f} ms\n"
        f"(circles: {noun} channels)",
        fontsize=8,
        fontweight="normal",
    )
    figure.colorbar(shown, ax=scalp_ax, label=f"effect ({unit})", shrink=0.8)
    return figure
