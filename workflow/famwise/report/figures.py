"""Report figures: time-frequency maps, null histograms, cluster views, channel graph.

Voltage contrasts (no frequency axis, `famwise.axes.is_voltage`) are drawn by
`famwise.report.voltage_figures`.

Every function draws from stored results only and returns a matplotlib
figure; :func:`famwise.figure_style.save_figure` writes it.
"""

import matplotlib.pyplot as plt
import numpy as np
from matplotlib.ticker import MaxNLocator

from famwise.axes import is_voltage
from famwise.electrodes import ChannelGraph, Positions, plot_graph
from famwise.figure_style import ACCENT, DIVERGING, MUTED, SEQUENTIAL, symmetric_limit
from famwise.report.results import ReportedContrast, ReportedCorrection
from famwise.report.scalp import topography

_FINE = 4


def stat_label(contrast: ReportedContrast) -> str:
    """Axis label of the contrast's statistic."""
    if contrast.test in ("repeated-measures", "between-groups") or contrast.statistic.upper() == "F":
        return "F"
    return "Yuen trimmed t" if contrast.statistic == "yuen" else "t"


def effect_unit(study: dict) -> str:
    """Unit of the effect map, from the measure and the baseline of the spec."""
    tf = study.get("decomposition", {}) or {}
    measure = str(tf.get("measure", "power"))
    mode = str((tf.get("baseline") or {}).get("mode", "none")).lower()
    if measure == "voltage" or tf.get("method") == "none":
        return "µV"
    if measure.lower() not in {"power", "induced"}:
        return f"{measure} difference"
    units = {
        "db": "dB",
        "decibel": "dB",
        "percent": "%",
        "percentage": "%",
        "zscore": "z",
        "z": "z",
        "ratio": "ratio",
        "logratio": "log10 ratio",
        "log_ratio": "log10 ratio",
    }
    return units.get(mode, "power, input units²")


def _time_extent(times_ms: np.ndarray) -> tuple[float, float]:
    step = float(np.median(np.diff(times_ms))) if len(times_ms) > 1 else 1.0
    return float(times_ms[0]) - step / 2, float(times_ms[-1]) + step / 2


def round_frequency_ticks(freqs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Round frequencies inside the grid and their positions on the image's row axis.

    A logarithmic grid gets powers of two (4, 8, 16, 32 Hz; with 3 x 2^k added
    when fewer than three fall inside), a linear grid 1-2-5 steps.

    Parameters
    ----------
    freqs : ndarray of float, shape (F,)
        The grid in Hz, increasing.

    Returns
    -------
    values : ndarray of float, shape (K,)
        Tick frequencies in Hz.
    rows : ndarray of float, shape (K,)
        Their positions in rows (0 = first frequency), interpolated on the grid's own scale.
    """
    freqs = np.asarray(freqs, dtype=float)
    if freqs.size < 2:
        return freqs.copy(), np.zeros(freqs.size)
    low, high = freqs[0] * (1 - 1e-9), freqs[-1] * (1 + 1e-9)
    ratios = freqs[1:] / freqs[:-1]
    logarithmic = freqs.size > 2 and np.allclose(ratios, ratios[0], rtol=1e-3) and ratios[0] > 1
    if logarithmic:
        powers = 2.0 ** np.arange(-3, 12)
        values = powers[(powers >= low) & (powers <= high)]
        if values.size < 3:
            values = np.union1d(values, (3 * powers)[(3 * powers >= low) & (3 * powers <= high)])
        scale = np.log
    else:
        values = MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]).tick_values(freqs[0], freqs[-1])
        values = values[(values >= low) & (values <= high)]
        scale = np.asarray
    if values.size == 0:
        values = freqs[[0, -1]]
    return values, np.interp(scale(values), scale(freqs), np.arange(freqs.size, dtype=float))


def _freq_axis(ax, freqs: np.ndarray) -> None:
    values, rows = round_frequency_ticks(freqs)
    ax.set_yticks(rows)
    ax.set_yticklabels([f"{v:g}" for v in values])
    ax.set_ylabel("frequency (Hz)")


def outline(ax, mask: np.ndarray, times_ms: np.ndarray, *, color: str = ACCENT, lw: float = 1.1) -> None:
    """Outline the cells of a boolean (F, T) mask on a time-frequency image."""
    if not np.any(mask):
        return
    fine = np.pad(np.repeat(np.repeat(mask.astype(float), _FINE, 0), _FINE, 1), 1)
    t0, t1 = _time_extent(times_ms)
    dx = (t1 - t0) / (mask.shape[1] * _FINE)
    xs = t0 + (np.arange(fine.shape[1]) - 0.5) * dx
    ys = -0.5 + (np.arange(fine.shape[0]) - 0.5) / _FINE
    ax.contour(xs, ys, fine, levels=[0.5], colors=color, linewidths=lw)


def hatch_left_out(ax, left_out: np.ndarray, times_ms: np.ndarray) -> None:
    """Hatch the cells of a boolean (F, T) mask of points left out of the family (grey diagonal lines)."""
    if left_out is None or not np.any(left_out):
        return
    fine = np.pad(np.repeat(np.repeat(left_out.astype(float), _FINE, 0), _FINE, 1), 1)
    t0, t1 = _time_extent(times_ms)
    dx = (t1 - t0) / (left_out.shape[1] * _FINE)
    xs = t0 + (np.arange(fine.shape[1]) - 0.5) * dx
    ys = -0.5 + (np.arange(fine.shape[0]) - 0.5) / _FINE
    with plt.rc_context({"hatch.color": MUTED, "hatch.linewidth": 0.6}):
        ax.contourf(xs, ys, fine, levels=[0.5, 1.5], colors="none", hatches=["////"])


def tf_image(
    ax,
    image: np.ndarray,
    freqs: np.ndarray,
    times_ms: np.ndarray,
    *,
    limit: float,
    cmap=DIVERGING,
    vmin: float | None = None,
    fade: np.ndarray | None = None,
):
    """Draw an (F, T) image with time in ms and frequency in Hz; returns the image."""
    t0, t1 = _time_extent(times_ms)
    extent = (t0, t1, -0.5, len(freqs) - 0.5)
    shown = ax.imshow(
        image,
        origin="lower",
        aspect="auto",
        extent=extent,
        cmap=cmap,
        vmin=-limit if vmin is None else vmin,
        vmax=limit,
    )
    if fade is not None and np.any(fade):
        veil = np.zeros(image.shape + (4,))
        veil[..., :3] = 1.0
        veil[..., 3] = np.where(fade, 0.6, 0.0)
        ax.imshow(veil, origin="lower", aspect="auto", extent=extent)
    if times_ms[0] < 0 < times_ms[-1]:
        ax.axvline(0, color=MUTED, lw=0.6, ls=":")
    ax.set_xlabel("time (ms)")
    _freq_axis(ax, freqs)
    return shown


def peak_channel(contrast: ReportedContrast) -> int:
    """Index of the channel holding the largest |statistic|."""
    stat = np.where(np.isfinite(contrast.stat), np.abs(contrast.stat), -np.inf)
    return int(np.unravel_index(np.argmax(stat), stat.shape)[0])


def map_figure(
    contrast: ReportedContrast,
    mask: np.ndarray,
    *,
    count_limit: int,
    title: str,
    subtitle: str,
    course: list[str] | None = None,
):
    """A correction's (or the uncorrected) significant points on one contrast.

    Top: the statistic at the peak channel, points not significant there
    faded, significant ones outlined. Bottom: how many channels are
    significant at each time-frequency point.

    Parameters
    ----------
    contrast : ReportedContrast
    mask : ndarray of bool, shape (C, F, T)
    count_limit : int
        Top of the channel-count colour scale (shared by the panels of a
        contrast; larger counts show in the top colour).
    title, subtitle : str
    course : list of str, optional
        Voltage contrasts: the channels of the time course (the spec's
        ``report.time_course_channels``); None for the peak channel.
    """
    if is_voltage(contrast.freqs):
        from famwise.report.voltage_figures import voltage_map_figure

        return voltage_map_figure(contrast, mask, title=title, subtitle=subtitle, course=course)
    times_ms = contrast.times * 1000.0
    channel = peak_channel(contrast)
    limit = symmetric_limit(contrast.stat)
    figure, (top, bottom) = plt.subplots(2, 1, figsize=(3.5, 4.9), sharex=True, layout="constrained")
    figure.suptitle(f"{title}\n{subtitle}", x=0.02, ha="left", fontsize=9)
    image = tf_image(top, contrast.stat[channel], contrast.freqs, times_ms, limit=limit, fade=~mask[channel])
    outline(top, mask[channel], times_ms)
    if contrast.left_out is not None:
        hatch_left_out(top, contrast.left_out[channel], times_ms)
    top.set_title(
        f"{stat_label(contrast)} at {contrast.channels[channel]} (peak channel)", fontsize=8, fontweight="normal"
    )
    top.set_xlabel("")
    figure.colorbar(image, ax=top, label=stat_label(contrast), shrink=0.9)
    counts = mask.sum(axis=0)
    shown = tf_image(bottom, counts, contrast.freqs, times_ms, limit=count_limit, cmap=SEQUENTIAL, vmin=0)
    if contrast.left_out is not None:
        hatch_left_out(bottom, contrast.left_out.any(axis=0), times_ms)
    bottom.set_title(
        "significant channels per point"
        + (" (hatched: points left out)" if contrast.left_out is not None and contrast.left_out.any() else ""),
        fontsize=8,
        fontweight="normal",
    )
    figure.colorbar(
        shown,
        ax=bottom,
        label="channels (count)",
        shrink=0.9,
        extend="max" if counts.max() > count_limit else "neither",
    )
    return figure


def null_axis_label(correction: ReportedCorrection, contrast: ReportedContrast) -> str:
    """What one value of a correction's permutation null is, with its unit."""
    label = stat_label(contrast)
    if correction.threshold_kind == "cluster":
        if correction.settings.get("cluster_stat", "mass") == "size":
            return "largest cluster size per permutation (points)"
        return f"largest cluster mass per permutation (sum of |{label}|)"
    if correction.threshold_kind == "tfce":
        return "largest |TFCE| per permutation (TFCE units)"
    return f"largest |{label}| per permutation ({label} units)"


def observed_maxima(correction: ReportedCorrection, contrast: ReportedContrast) -> dict[str, float]:
    """The observed largest positive and negative values the null is compared with."""
    if correction.threshold_kind == "cluster":
        values = {"+": [], "-": []}
        for row in correction.clusters:
            sign = "-" if str(row.get("sign", "+")).strip().lower() in {"-", "negative", "-1"} else "+"
            values[sign].append(abs(float(row["statistic"])))
        return {sign: max(found) for sign, found in values.items() if found}
    source = correction.tfce if correction.threshold_kind == "tfce" else contrast.stat
    if source is None:
        return {}
    finite = source[np.isfinite(source)]
    result = {}
    if np.any(finite > 0):
        result["+"] = float(finite.max())
    if np.any(finite < 0):
        result["-"] = float(-finite.min())
    return result


def null_figure(correction: ReportedCorrection, contrast: ReportedContrast):
    """Histogram of a permutation null with the observed maxima and the critical value."""
    figure, ax = plt.subplots(figsize=(6.4, 2.6), layout="constrained")
    null = correction.null[np.isfinite(correction.null)]
    ax.hist(null, bins=min(60, max(10, len(null) // 20)), color="#b9c3d6", edgecolor="#7d8aa3", lw=0.4)
    ax.set_xlabel(null_axis_label(correction, contrast))
    ax.set_ylabel("permutations (count)")
    if np.isfinite(correction.threshold) and correction.threshold_kind != "p":
        ax.axvline(
            correction.threshold, color=ACCENT, lw=1.2, ls="--", label=f"critical value {correction.threshold:.4g}"
        )
    styles = {"+": ("#b2182b", "-"), "-": ("#2a4d9b", "-.")}
    for sign, value in observed_maxima(correction, contrast).items():
        color, line = styles[sign]
        word = "positive" if sign == "+" else "negative"
        ax.axvline(value, color=color, lw=1.4, ls=line, label=f"observed largest {word} {value:.4g}")
    # beside the axes, so that it never covers the histogram or an observed-value line
    ax.legend(frameon=False, fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    ax.set_title(f"{correction.name}: permutation null ({len(null)} rows)")
    return figure


def cluster_points(correction: ReportedCorrection, contrast: ReportedContrast, row: dict) -> np.ndarray:
    """Boolean (C, F, T) map of the points of one cluster of the table."""
    ident = int(row["id"])
    sign = -1 if str(row.get("sign", "+")).strip().lower() in {"-", "negative", "-1"} else 1
    if correction.cluster_id is not None:
        for candidate in (ident, sign * abs(ident)):
            found = correction.cluster_id == candidate
            if np.any(found):
                return found
    names = set(str(row["channels"]).split(","))
    in_channels = np.array([c in names for c in contrast.channels])[:, None, None]
    times_ms = contrast.times * 1000.0
    in_time = ((times_ms >= float(row["time_start_ms"]) - 1e-6) & (times_ms <= float(row["time_end_ms"]) + 1e-6))[
        None, None, :
    ]
    if is_voltage(contrast.freqs):  # the table has no frequency columns
        in_freq = np.ones((1, 1, 1), dtype=bool)
    else:
        in_freq = (
            (contrast.freqs >= float(row["freq_low_hz"]) - 1e-6) & (contrast.freqs <= float(row["freq_high_hz"]) + 1e-6)
        )[None, :, None]
    return correction.mask & in_channels & in_time & in_freq & (np.sign(contrast.stat) == sign)


def cluster_figure(
    contrast: ReportedContrast, correction: ReportedCorrection, row: dict, flat: np.ndarray, *, unit: str
):
    """Three views of one cluster: TF image, scalp map at its peak, time course.

    Parameters
    ----------
    contrast, correction : the cluster's contrast and correction
    row : dict
        The cluster's row of ``clusters.tsv``.
    flat : ndarray of float, shape (C, 2)
        Projected channel positions (see :func:`famwise.report.scalp.project`).
    unit : str
        Unit of the effect map.
    """
    points = cluster_points(correction, contrast, row)
    if is_voltage(contrast.freqs):
        from famwise.report.voltage_figures import voltage_cluster_figure

        return voltage_cluster_figure(contrast, correction, row, points, flat, unit=unit)
    noun = correction.table_noun
    names = [c for c in str(row["channels"]).split(",") if c]
    members = np.array([c in set(names) for c in contrast.channels])
    if not members.any():
        members = points.any(axis=(1, 2))
    times_ms = contrast.times * 1000.0
    figure, (tf_ax, scalp_ax, course_ax) = plt.subplots(
        1, 3, figsize=(11.5, 3.0), layout="constrained", width_ratios=[1.25, 1.0, 1.1]
    )
    figure.get_layout_engine().set(wspace=0.06)  # room between a colour bar's label and the next axis
    start_ms, end_ms = float(row["time_start_ms"]), float(row["time_end_ms"])
    figure.suptitle(
        f"{contrast.name}, {correction.name}: {noun} {row['id']} at "
        f"{float(row['freq_low_hz']):.3g}-{float(row['freq_high_hz']):.3g} Hz and "
        f"{start_ms:.0f} to {end_ms:.0f} ms (p = {float(row['p']):.4g})",
        x=0.01,
        ha="left",
        fontsize=9,
        fontweight="bold",
    )
    mean_effect = contrast.effect[members].mean(axis=0)
    limit = symmetric_limit(mean_effect)
    image = tf_image(tf_ax, mean_effect, contrast.freqs, times_ms, limit=limit)
    outline(tf_ax, points.any(axis=0), times_ms)
    if contrast.left_out is not None:
        hatch_left_out(tf_ax, contrast.left_out[members].any(axis=0), times_ms)
    tf_ax.set_title(f"effect averaged over the {noun}'s channels", fontsize=8, fontweight="normal")
    figure.colorbar(image, ax=tf_ax, label=f"effect ({unit})", shrink=0.9)
    f_index = int(np.argmin(np.abs(contrast.freqs - float(row["peak_freq_hz"]))))
    t_index = int(np.argmin(np.abs(times_ms - float(row["peak_time_ms"]))))
    scalp = contrast.effect[:, f_index, t_index]
    shown = topography(scalp_ax, scalp, flat, limit=symmetric_limit(scalp), marked=members)
    if contrast.left_out is not None and contrast.left_out[:, f_index, t_index].any():
        gone = contrast.left_out[:, f_index, t_index]
        scalp_ax.plot(*flat[gone].T, "x", color=MUTED, ms=5, mew=1.2)  # channels left out at this point
    scalp_ax.set_title(
        f"effect at peak: {contrast.freqs[f_index]:.3g} Hz, "
        f"{times_ms[t_index]:.0f} ms\n(filled dots: the {noun}'s channels)",
        fontsize=8,
        fontweight="normal",
    )
    figure.colorbar(shown, ax=scalp_ax, label=f"effect ({unit})", shrink=0.8)
    rows_in = points.any(axis=(0, 2))
    course = contrast.effect[members][:, rows_in].mean(axis=(0, 1))
    course_ax.axhline(0, color=MUTED, lw=0.6)
    course_ax.plot(times_ms, course, color=ACCENT, lw=1.3)
    _span_bar(course_ax, start_ms, end_ms)
    band = contrast.freqs[rows_in]
    course_ax.set_title(
        f"time course, {band.min():.3g}-{band.max():.3g} Hz, {noun} channels\n"
        f"(bar under the axis: the {noun}'s time span)",
        fontsize=8,
        fontweight="normal",
    )
    course_ax.set_xlabel("time (ms)")
    course_ax.set_ylabel(f"effect ({unit})")
    return figure


def _span_bar(ax, start_ms: float, end_ms: float) -> None:
    """A bar just under the time axis from ``start_ms`` to ``end_ms`` (tick labels moved below it)."""
    ax.tick_params(axis="x", pad=7)
    ax.plot(
        [start_ms, end_ms],
        [-0.045, -0.045],
        transform=ax.get_xaxis_transform(),
        color=ACCENT,
        lw=3.5,
        solid_capstyle="butt",
        clip_on=False,
    )


def graph_figure(graph: ChannelGraph, positions: Positions):
    """The channel neighbor graph seen from above the head."""
    figure, ax = plt.subplots(figsize=(4.4, 4.4), layout="constrained")
    plot_graph(graph, positions, ax)
    ax.set_title(f"{len(graph.channels)} channels, {graph.n_edges} neighbor pairs ({graph.method})")
    return figure
