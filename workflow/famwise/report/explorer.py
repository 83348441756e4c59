"""The interactive explorer of one contrast: data packed into the page, drawn by a small script.

The statistic, the uncorrected p and every correction's corrected p, mask and
cluster labels are embedded as quantised arrays, each zlib-compressed and in
base64 (flattened in (channel, frequency, time) order):

- statistic: int16, ``round(stat / limit * 32767)``; NaN as -32768;
- p values: uint16, ``round(-log10(p) * 1000)`` (p to 0.23 %, down to 1e-65);
- masks: one bit per point (``numpy.packbits``, big-endian bit order);
- cluster or region labels: int16.

A voltage contrast (`famwise.axes.is_voltage`) packs the same arrays (its
one frequency entry makes them (channel, time)), gives ``freqs`` empty and
``voltage`` true, and its clusters carry no frequency columns; the page then
shows a channel x time map and the selected channels' time course instead of
a time-frequency map.

The scripts (``explorer.js`` and ``explorer_voltage.js`` beside this module,
plain JavaScript, no network) inflate them with the browser's own
``DecompressionStream`` and draw on canvases. Without JavaScript the section shows a short
note and the static figures above it carry the results.
"""

import base64
import json
import zlib
from importlib import resources
from pathlib import Path

import numpy as np

from famwise.axes import FREQUENCY_COLUMNS, is_voltage
from famwise.correct.clusters import CLUSTER_COLUMNS
from famwise.figure_style import DIVERGING, symmetric_limit
from famwise.report.html import anchor, esc, note
from famwise.report.results import ReportedContrast, ReportedCorrection
from famwise.report.study_words import named
from famwise.report.values import categories, caveat, read_values

SCRIPTS = ("explorer_voltage.js", "explorer.js")
"""The explorer's scripts, in page order (the first defines what the second calls for voltage contrasts)."""
P_SCALE = 1000.0
"""Quantisation steps per decade of p."""
STAT_STEPS = 32767


def _b64(array: np.ndarray) -> str:
    return base64.b64encode(zlib.compress(np.ascontiguousarray(array).tobytes(), 9)).decode("ascii")


def pack_stat(stat: np.ndarray, limit: float) -> str:
    """The statistic as little-endian int16 steps of ``limit / 32767`` (NaN as -32768), base64."""
    scaled = np.clip(np.round(np.nan_to_num(stat / limit, nan=0.0) * STAT_STEPS), -STAT_STEPS, STAT_STEPS)
    steps = np.where(np.isfinite(stat), scaled, -STAT_STEPS - 1).astype("<i2")
    return _b64(steps.ravel())


def pack_p(p: np.ndarray) -> str:
    """p values as little-endian uint16 of ``-log10(p) * 1000`` (p above 1 as 1, NaN as 1), base64."""
    p = np.nan_to_num(np.asarray(p, dtype=float), nan=1.0)
    decades = -np.log10(np.clip(p, 1e-300, 1.0))
    return _b64(np.clip(np.round(decades * P_SCALE), 0, 65535).astype("<u2").ravel())


def pack_mask(mask: np.ndarray) -> str:
    """A boolean map as bits (first point in the highest bit of the first byte), base64."""
    return _b64(np.packbits(np.asarray(mask, dtype=bool).ravel()))


def unpack(encoded: str, dtype: str, count: int) -> np.ndarray:
    """The inverse of the packers' base64 (for tests): ``dtype`` ``"<i2"``, ``"<u2"`` or ``"bits"``."""
    raw = zlib.decompress(base64.b64decode(encoded))
    if dtype == "bits":
        return np.unpackbits(np.frombuffer(raw, np.uint8))[:count].astype(bool)
    return np.frombuffer(raw, dtype)[:count]


def colour_table(steps: int = 64) -> list[str]:
    """The report's diverging CIELAB map as ``steps`` hex colours, low to high."""
    rgb = DIVERGING(np.linspace(0.0, 1.0, steps))[:, :3]
    return ["#" + "".join(f"{round(v * 255):02x}" for v in colour) for colour in rgb]


def _correction_data(correction: ReportedCorrection, alpha: float, folder: Path, *, voltage: bool) -> dict:
    data = {
        "name": correction.name,
        "method": correction.method,
        "noun": correction.table_noun,
        "n_significant": correction.n_significant,
        "p": pack_p(correction.p_corrected),
        "mask": pack_mask(correction.mask),
        "clusters": [],
        "values": {},
    }
    if correction.cluster_id is not None:
        data["ids"] = _b64(np.asarray(correction.cluster_id).astype("<i2").ravel())
        significant = [row for row in correction.clusters if float(row["p"]) <= alpha]
        columns = [k for k in CLUSTER_COLUMNS if not (voltage and k in FREQUENCY_COLUMNS)]
        data["clusters"] = [{k: row.get(k) for k in columns} for row in significant]
        columns, values = read_values(folder / correction.name)
        data["values"] = {ident: _strips(columns, rows) for ident, rows in values.items()}
    return data


def _strips(columns: list[str], rows: list[dict]) -> list[dict]:
    return [dict(strip, values=[round(v, 6) for v in strip["values"]]) for strip in categories(columns, rows)]


def explorer_data(
    contrast: ReportedContrast,
    folder: Path,
    *,
    flat: np.ndarray,
    alpha: float,
    stat_label: str,
    unit: str,
    positive: str,
    negative: str,
    start: list[str] | None = None,
) -> dict:
    """Everything the script draws for one contrast, as JSON-ready values.

    Points left out of the family (``contrast.left_out``) go without a
    statistic (NaN): the page leaves them blank.

    Parameters
    ----------
    contrast : ReportedContrast
    folder : Path
        The contrast's result folder ``contrasts/<c>`` (for ``subject_values.tsv``).
    flat : ndarray of float, shape (C, 2)
        Projected channel positions (head radius 1, nose up).
    alpha : float
    stat_label, unit : str
        Name of the statistic and unit of the subject values.
    positive, negative : str
        Plain words for the two signs of the statistic.
    start : list of str, optional
        Channels selected when the page opens (and after a reset); default
        the peak channel.
    """
    voltage = bool(is_voltage(contrast.freqs))
    limit = symmetric_limit(contrast.stat)
    stat = contrast.stat if contrast.left_out is None else np.where(contrast.left_out, np.nan, contrast.stat)
    return {
        "contrast": contrast.name,
        "shape": list(contrast.stat.shape),
        "channels": list(contrast.channels),
        "xy": np.round(np.asarray(flat, dtype=float), 4).tolist(),
        "voltage": voltage,
        "freqs": [] if voltage else [round(float(f), 4) for f in contrast.freqs],
        "times": [round(float(t) * 1000.0, 3) for t in contrast.times],
        "limit": limit,
        "stat": pack_stat(stat, limit),
        "p": pack_p(contrast.p),
        "statLabel": stat_label,
        "unit": unit,
        "alpha": alpha,
        "positive": positive,
        "negative": negative,
        "colours": colour_table(),
        "start": [list(contrast.channels).index(name) for name in start or []],
        "corrections": [_correction_data(c, alpha, Path(folder), voltage=voltage) for c in contrast.corrections],
    }


def assets() -> str:
    """The explorer's style sheet and script (once per page, after the last explorer)."""
    folder = resources.files("famwise.report")
    code = "\n".join(folder.joinpath(name).read_text(encoding="utf-8") for name in SCRIPTS)
    return f"<style>{CSS}</style><script>{code}</script>"


def explorer_block(data: dict) -> str:
    """The explorer's HTML for one contrast: controls, canvases, cluster list and its data."""
    ident = anchor("explore", data["contrast"])
    payload = json.dumps(data, separators=(",", ":")).replace("</", "<\\/")
    options = "".join(
        f'<option value="{k}">{esc(named(c["name"], c["method"]))}</option>' for k, c in enumerate(data["corrections"])
    )
    voltage = bool(data.get("voltage"))
    views = _VOLTAGE_VIEWS if voltage else _TF_VIEWS
    return (
        f'<h3 id="{ident}" class="xp-title">Explore {esc(data["contrast"])}</h3>'
        f'<div class="explorer" data-explorer="{ident}">'
        '<p class="xp-nojs">The explorer needs JavaScript; the figures above show the same results.</p>'
        f'<p class="xp-intro">{views[0]} Selecting a cluster or region below shows its channels, its extent, '
        "its row of the table and each subject's value.</p>"
        '<div class="xp-bar"><label>correction <select class="xp-correction">'
        f'{options}</select></label><span class="xp-selection"></span>'
        '<button type="button" class="xp-clear">clear selection</button></div>'
        f"{views[1]}</div>"
        '<div class="xp-readout" aria-live="polite">Hover over the map or a channel.</div>'
        '<div class="xp-lower"><div class="xp-list"></div><div class="xp-detail"></div></div>'
        f'<div class="xp-caveat">{note(caveat(voltage=voltage), warning=True)}</div>'
        f'<script type="application/json" class="xp-data">{payload}</script></div>'
    )


_HEAD_VIEW = (
    '<div class="xp-views"><figure class="xp-head-fig"><canvas class="xp-head" width="320" height="340">'
    '</canvas><figcaption class="xp-head-caption"></figcaption></figure>'
)
_TF_VIEWS = (
    "Pick a correction, click channels on the head (shift-click adds more) to see their mean statistic over time "
    "and frequency, and click the map to see the scalp at that point.",
    _HEAD_VIEW + '<figure class="xp-tf-fig"><canvas class="xp-tf" width="620" height="345"></canvas>'
    '<figcaption class="xp-tf-caption"></figcaption></figure>',
)
"""Intro sentence and canvases of a time-frequency contrast: the head and the map of the selected channels."""
_VOLTAGE_VIEWS = (
    "Pick a correction, click channels on the head or rows of the channel x time map (shift-click adds more) to "
    "see their mean statistic over time, and click a time to see the scalp at that time.",
    _HEAD_VIEW + '<figure class="xp-tf-fig"><canvas class="xp-tf" width="620" height="345"></canvas>'
    '<figcaption class="xp-tf-caption"></figcaption></figure>'
    '<figure class="xp-course-fig"><canvas class="xp-course" width="620" height="215"></canvas>'
    '<figcaption class="xp-course-caption"></figcaption></figure>',
)
"""Intro sentence and canvases of a voltage contrast: the head, the channel x time map and the time course."""


CSS = """
.explorer { border: 1px solid var(--rule); padding: 10px 14px; margin: 10px 0 18px; background: #fff; }
.explorer .xp-bar { display: flex; gap: 16px; align-items: center; font-size: 13.5px; margin-bottom: 8px;
                    flex-wrap: wrap; }
.explorer select, .explorer button { font: inherit; font-size: 13px; padding: 2px 6px; }
.explorer .xp-selection { color: var(--soft); }
.explorer .xp-views { display: flex; flex-wrap: wrap; gap: 18px; align-items: flex-start; }
.explorer canvas { display: block; cursor: crosshair; }
.explorer figure { margin: 0; }
.explorer .xp-head-fig { width: 320px; }
.explorer .xp-tf-fig, .explorer .xp-course-fig { width: 620px; }
.explorer .xp-readout { font-size: 13px; font-variant-numeric: tabular-nums; background: var(--band);
                        padding: 5px 9px; margin: 8px 0; min-height: 1.6em; }
.explorer .xp-list table { cursor: pointer; }
.explorer .xp-list tr.xp-chosen td { background: #f3e7c9; }
.explorer .xp-list tr:hover td { background: var(--band); }
.explorer .xp-lower { display: block; }
.explorer .xp-detail { font-size: 12.5px; display: flex; flex-wrap: wrap; gap: 24px; align-items: flex-start; }
.explorer .xp-strip-note { max-width: 480px; font-size: 12.5px; }
.explorer .xp-nojs { color: var(--warn); }
.explorer .xp-intro { margin-top: 0; }
.explorer.xp-ready .xp-nojs { display: none; }
.explorer:not(.xp-ready) .xp-intro, .explorer:not(.xp-ready) .xp-bar, .explorer:not(.xp-ready) .xp-views,
.explorer:not(.xp-ready) .xp-readout, .explorer:not(.xp-ready) .xp-lower { display: none; }
@media print { .explorer, .xp-title { display: none; } }
"""
"""Styles of the explorer (added to the page's style sheet)."""
