"""Where a contrast's points lie, in words: time-frequency points, or channel x time points of voltage maps.

A voltage contrast (`famwise.axes.is_voltage`) has no frequency axis, so none
of these texts names a frequency for it.
"""

import numpy as np

from famwise.axes import is_voltage
from famwise.report.html import esc
from famwise.report.methods import fmt
from famwise.report.results import ReportedContrast


def grid_words(contrast: ReportedContrast) -> str:
    """The contrast's points, e.g. ``"32 channels × 20 frequencies × 61 times"`` (no frequencies for voltage)."""
    frequencies = "" if is_voltage(contrast.freqs) else f"{len(contrast.freqs)} frequencies × "
    return f"{len(contrast.channels)} channels × {frequencies}{len(contrast.times)} times"


def extent_words(contrast: ReportedContrast, freqs: np.ndarray, times: np.ndarray) -> str:
    """The time span (and band) of points with frequency indices ``freqs`` and time indices ``times``."""
    times_ms = contrast.times * 1000.0
    text = f"between {fmt(float(times_ms[times.min()]))} and {fmt(float(times_ms[times.max()]))} ms"
    if is_voltage(contrast.freqs):
        return text
    return f"{text} and {contrast.freqs[freqs.min()]:.3g} and {contrast.freqs[freqs.max()]:.3g} Hz"


def point_place(contrast: ReportedContrast, channel: int, freq: int, time: int) -> str:
    """One point, e.g. ``"Fz, 6 Hz, 600 ms"`` (``"Pz, 600 ms"`` for voltage)."""
    at = "" if is_voltage(contrast.freqs) else f"{contrast.freqs[freq]:.3g} Hz, "
    return f"{esc(contrast.channels[channel])}, {at}{contrast.times[time] * 1000.0:.0f} ms"


def cluster_caption(contrast: ReportedContrast, row: dict, *, noun: str, sense: str, stat_label: str) -> str:
    """The caption of one significant cluster's (or TFCE region's) figure."""
    voltage = is_voltage(contrast.freqs)
    band = "" if voltage else f"{fmt(row['freq_low_hz'])} to {fmt(row['freq_high_hz'])} Hz, "
    at = "" if voltage else f"{fmt(row['peak_freq_hz'])} Hz, "
    if voltage:
        views = (
            f"Left: the effect's time course averaged over the {noun}'s channels and at its peak channel; right: "
            f"scalp map of the effect averaged over the {noun}'s time span."
        )
    else:
        views = (
            f"Left: effect over the {noun}'s channels, {noun} outlined; middle: scalp map at the peak; right: time "
            f"course over the {noun}'s channels and frequencies."
        )
    return (
        f"<b>{noun.capitalize()} {esc(row['id'])}</b> ({esc(sense)}), p = {fmt(float(row['p']))}: roughly "
        f"{fmt(row['time_start_ms'])} to {fmt(row['time_end_ms'])} ms, {band}"
        f"{len(str(row['channels']).split(','))} channels; peak {stat_label} = {fmt(row['peak_stat'])} at "
        f"{esc(row['peak_channel'])}, {at}{fmt(row['peak_time_ms'])} ms. {views}"
    )


def side_by_side_words(contrast: ReportedContrast, course: list[str] | None = None) -> str:
    """What the uncorrected and corrected map figures show (``course``: the chosen time-course channels)."""
    if is_voltage(contrast.freqs):
        if not course:
            top = "at the peak channel, a bar under the axis where it is significant"
        elif len(course) == 1:
            top = f"at {course[0]} (report.time_course_channels), a bar under the axis where it is significant"
        else:
            top = (
                f"averaged over {', '.join(course)} (report.time_course_channels), a bar under the axis where it "
                "is significant at any of them"
            )
        return (
            f"Top: the statistic's time course {top}. "
            "Bottom: the statistic over channels and times, points not significant faded."
        )
    return (
        "Top: the statistic at the peak channel, points not significant there faded, significant ones outlined. "
        "Bottom: number of significant channels at each time and frequency."
    )
