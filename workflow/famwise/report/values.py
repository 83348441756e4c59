"""The report's per-subject values: a strip plot per significant cluster or region, and the caveat.

Reads ``contrasts/<c>/<correction>/subject_values.tsv`` (written by
:mod:`famwise.subject_values`); nothing is recomputed.
"""

from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np

from famwise.figure_style import ACCENT, DIVERGING, MUTED, figure_style
from famwise.report.html import esc, note
from famwise.report.results import read_tsv

_MOST = 8
"""Clusters drawn in the static figure (the TSV has every significant one)."""

CAVEAT = (
    "<b>Circular analysis:</b> these values come from points selected by the same data the test used, "
    "so they overstate the effect (Kriegeskorte et al. 2009, Nature Neuroscience 12:535-540). Use them "
    "to plot the effect, spot outliers or relate it to behaviour descriptively; never test them again. "
    "An unbiased value comes from a region fixed in advance (from earlier work or independent data): "
    "name it in the spec under <code>planned_regions</code> (channels, a frequency band, a time window) "
    "and the report gives each subject's mean over it."
)


def caveat(*, voltage: bool) -> str:
    """The circular-analysis note; voltage maps' planned regions have no frequency band."""
    return (
        CAVEAT.replace("channels, a frequency band, a time window", "channels and a time window") if voltage else CAVEAT
    )


def read_values(folder: Path, name: str = "subject_values.tsv") -> tuple[list[str], dict[str, list[dict]]]:
    """Value columns and rows by cluster id (or region name) of ``<folder>/<name>`` (empty when absent)."""
    path = Path(folder) / name
    if not path.is_file():
        return [], {}
    rows = read_tsv(path)
    if not rows:
        return [], {}
    columns = [k for k in rows[0] if k not in {"id", "sign", "p", "n_points", "subject", "group", "covariate"}]
    found: dict[str, list[dict]] = {}
    for row in rows:
        found.setdefault(row["id"], []).append(row)
    return columns, found


def categories(columns: list[str], rows: list[dict]) -> list[dict]:
    """The strips of one cluster: per value column (per group for two-sample), subjects and values.

    The contrast column is left out when it repeats the only condition (one-sample, two-sample and
    correlation tests). Each entry: ``label``, ``subjects``, ``values`` (floats) and ``paired``
    (True for the strips of a paired contrast, whose subjects are joined by lines).
    """
    shown = columns[:1] if len(columns) == 2 and columns[1] == "contrast" else columns
    groups = list(dict.fromkeys(r.get("group", "") for r in rows if r.get("group")))
    out = []
    for name in shown:
        for group in groups or [None]:
            mine = [r for r in rows if group is None or r.get("group") == group]
            out.append(
                {
                    "label": name if group is None else f"{name} ({group})",
                    "subjects": [r["subject"] for r in mine],
                    "values": [float(r[name]) for r in mine],
                    "paired": not groups and len(shown) == 3 and shown[2] == "contrast",
                }
            )
    return out


def _column_words(columns: list[str], rows: list[dict]) -> str:
    """What the strips of a cluster are, e.g. "columns are the conditions and the tested contrast, per group"."""
    labels = [strip["label"] for strip in categories(columns, rows)]
    shown = list(dict.fromkeys(label.split(" (")[0] for label in labels))
    conditions = [name for name in shown if name != "contrast"]
    words = "the condition" if len(conditions) == 1 else "the conditions"
    words += " and the tested contrast" if "contrast" in shown else ""
    return f"columns are {words}" + (", per group" if any(r.get("group") for r in rows) else "")


def strip_figure(columns: list[str], clusters: dict[str, list[dict]], *, noun: str, unit: str):
    """Small multiples: per cluster, each subject's value per strip as dots, the group mean as a bar."""
    shown = list(clusters.items())[:_MOST]
    width = len(categories(columns, shown[0][1]))
    figure, axes = plt.subplots(
        1, len(shown), figsize=(0.9 + max(2.1, 1.05 * width) * len(shown), 2.9), layout="constrained", squeeze=False
    )
    for ax, (ident, rows) in zip(axes[0], shown):
        strips = categories(columns, rows)
        if strips[0]["paired"]:
            spread = (np.arange(len(rows)) * 0.618034 % 1 - 0.5) * 0.36
            ax.plot(
                np.array([0, 1])[:, None] + spread,
                np.array([strips[0]["values"], strips[1]["values"]]),
                color="#b8bcc4",
                lw=0.7,
            )
        for k, strip in enumerate(strips):
            values = np.array(strip["values"])
            spread = (np.arange(len(values)) * 0.618034 % 1 - 0.5) * 0.36
            colour = DIVERGING(0.93) if strip["label"] == "contrast" else "#5d6f8f"
            ax.scatter(k + spread, values, s=14, color=colour, alpha=0.85, edgecolor="white", lw=0.4, zorder=3)
            ax.plot([k - 0.3, k + 0.3], [values.mean()] * 2, color=ACCENT, lw=2.2, zorder=4)
        ax.axhline(0, color=MUTED, lw=0.6, ls="--")
        ax.set_xticks(range(len(strips)), [s["label"] for s in strips], rotation=20 if len(strips) > 2 else 0)
        ax.set_xlim(-0.6, len(strips) - 0.4)
        ax.set_title(f"{noun} {ident} ({rows[0]['n_points']} points)", fontsize=8.5)
    axes[0][0].set_ylabel(f"mean over the {noun} ({unit})")
    return figure


def values_block(folder: Path, stem: str, *, noun: str, unit: str, write, voltage: bool = False) -> str:
    """The per-subject values of one correction (figure, link to the TSV, caveat); "" when none.

    ``voltage``: the contrast's maps are voltage maps, whose planned regions have no frequency band.
    """
    columns, clusters = read_values(folder)
    if not clusters:
        return ""
    with figure_style():
        fig = strip_figure(columns, clusters, noun=noun, unit=unit)
    more = len(clusters) - _MOST
    caption = (
        f"<b>Per-subject values</b>: each subject's mean over the points of each significant {noun} "
        f"(dots), the group mean (bar); {_column_words(columns, next(iter(clusters.values())))}. "
        + (f"The first {_MOST} of {len(clusters)} {noun}s are drawn; every" if more > 0 else "Every")
        + f" value is in {esc(Path(folder).parent.name)}/{esc(Path(folder).name)}/subject_values.tsv."
    )
    return (
        f"<h4>Per-subject values of the significant {noun}s</h4>"
        + note(
            caveat(voltage=voltage),
            warning=True,
        )
        + write(fig, stem, caption=caption, alt=f"per-subject values of each {noun}")
    )


def planned_block(folder: Path, stem: str, *, unit: str, write) -> str:
    """Each subject's mean over the spec's planned regions (``<folder>/planned_values.tsv``); "" when none."""
    path = Path(folder) / "planned_values.tsv"
    if not path.is_file():
        return ""
    columns, regions = read_values(folder, name=path.name)
    if not regions:
        return ""
    with figure_style():
        fig = strip_figure(columns, regions, noun="region", unit=unit)
    caption = (
        "<b>Planned regions</b>: each subject's mean over each region named in the spec's "
        "<code>planned_regions</code> (dots), the group mean (bar). Every value is in "
        f"{esc(Path(folder).name)}/planned_values.tsv, the regions' definitions in its sidecar."
    )
    text = (
        "<p>These regions were named before the analysis, so their values were not selected by this "
        "result: if the regions really were fixed before looking at the data, they estimate the effect "
        "without the bias of a significant cluster's values.</p>"
    )
    return (
        "<h3>Planned regions</h3>"
        + text
        + write(fig, stem, caption=caption, alt="per-subject values of the planned regions")
    )
