"""Calibration shards -> the error-rate table, its figure and its report section.

For every correction: the empirical family-wise error rate (share of null
datasets with at least one significant point) with its exact binomial 95%
interval (Clopper & Pearson 1934). Every point of a null dataset is a true
null, so each detection is a false discovery: a dataset's false discovery
proportion is 1 when it has any detection and 0 otherwise, and the mean FDP
equals the FWER. It is reported beside the nominal level so that FDR
corrections (nominal q) can be read off the same table.

References
----------
Clopper CJ, Pearson ES (1934). The use of confidence or fiducial limits
illustrated in the case of the binomial. Biometrika 26(4):404-413.
"""

import csv
import hashlib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from famwise.atomic import write_json, write_text
from famwise.calibrate.settings import UNCORRECTED
from famwise.errors import UserError
from famwise.settings import CalibrationSettings
from famwise.settings_codec import to_json

COLUMNS = (
    "correction",
    "method",
    "datasets",
    "detections",
    "fwer",
    "fwer_ci_low",
    "fwer_ci_high",
    "mean_fdp",
    "nominal",
    "permutations",
)
SIDECAR = {
    "correction": {
        "Description": "Correction name as in the study spec; 'uncorrected' is the reference row: "
        "parametric p <= alpha at any point, no correction."
    },
    "method": {"Description": "Correction method."},
    "datasets": {"Description": "Number of null datasets made from the subjects' own maps."},
    "detections": {"Description": "Null datasets with at least one significant point."},
    "fwer": {"Description": "Empirical family-wise error rate: detections / datasets."},
    "fwer_ci_low": {"Description": "Lower end of the exact binomial (Clopper-Pearson) 95% interval of fwer."},
    "fwer_ci_high": {"Description": "Upper end of the exact binomial (Clopper-Pearson) 95% interval of fwer."},
    "mean_fdp": {
        "Description": "Mean false discovery proportion over the null datasets. Every point of a null "
        "dataset is a true null, so a dataset's FDP is 1 with any detection and 0 otherwise; "
        "the mean equals fwer."
    },
    "nominal": {
        "Description": "The level the correction was run at: alpha (family-wise methods) or q (fdr-bh, fdr-by)."
    },
    "permutations": {
        "Description": "Random permutations each null dataset was tested with (the study's own "
        "number unless reduced with --permutations; all of them when the table is "
        "exact); n/a for corrections on parametric p-values."
    },
}


@dataclass(frozen=True)
class CalibrationRow:
    """One correction's error rate over the null datasets (fields as in ``COLUMNS``)."""

    correction: str
    method: str
    datasets: int
    detections: int
    fwer: float
    fwer_ci_low: float
    fwer_ci_high: float
    mean_fdp: float
    nominal: float
    permutations: int | None


def fwer_interval(detections: int, datasets: int) -> tuple[float, float]:
    """Exact binomial (Clopper-Pearson) 95% interval of detections / datasets."""
    from scipy.stats import binomtest

    interval = binomtest(int(detections), int(datasets)).proportion_ci(confidence_level=0.95, method="exact")
    return float(interval.low), float(interval.high)


def merge_shards(shards: list[dict[str, np.ndarray]], *, datasets: int) -> dict[str, np.ndarray]:
    """Join shard arrays in dataset order; every dataset 0..datasets-1 must be there once."""
    if not shards:
        raise UserError("calibration: no shard files to merge")
    indices = np.concatenate([c["datasets"] for c in shards])
    order = np.argsort(indices, kind="stable")
    if not np.array_equal(indices[order], np.arange(datasets)):
        raise UserError(
            f"calibration: the shard files hold {indices.size} datasets, expected datasets 0 to {datasets - 1} once each "
            "(shards from different settings?); delete the calibration folder and rerun"
        )
    labels = shards[0]["labels"]
    if any(not np.array_equal(c["labels"], labels) for c in shards):
        raise UserError(
            "calibration: the shard files list different corrections; delete the calibration folder and rerun"
        )
    return {"labels": labels, "n_significant": np.concatenate([c["n_significant"] for c in shards])[order]}


def calibration_rows(
    merged: dict[str, np.ndarray], *, settings: CalibrationSettings, table_rows: int | None
) -> list[CalibrationRow]:
    """The table rows from merged shards.

    Parameters
    ----------
    merged : dict
        From :func:`merge_shards`.
    settings : CalibrationSettings
        The calibration settings.
    table_rows : int or None
        Rows of the permutation table each dataset used (identity included);
        None when no correction needs the permutation null.
    """
    entries = {c.correction.label: c.record()["correction"] for c in settings.corrections}
    detected = merged["n_significant"] > 0
    rows = []
    for column, label in enumerate(str(x) for x in merged["labels"]):
        entry = entries.get(label, {"method": UNCORRECTED})
        method = entry["method"]
        nominal = entry.get("level") or settings.alpha
        uses_null = method in ("max-stat", "cluster", "tfce") or entry.get("pvalues") == "permutation"
        hits = int(detected[:, column].sum())
        n = int(detected.shape[0])
        low, high = fwer_interval(hits, n)
        rows.append(
            CalibrationRow(
                correction=label,
                method=method,
                datasets=n,
                detections=hits,
                fwer=hits / n,
                fwer_ci_low=low,
                fwer_ci_high=high,
                mean_fdp=float(detected[:, column].mean()),
                nominal=float(nominal),
                permutations=table_rows - 1 if uses_null and table_rows is not None else None,
            )
        )
    return rows


def write_table(
    path: Path, rows: list[CalibrationRow], *, settings: CalibrationSettings, table_rows: int | None, basis: dict
) -> None:
    """``<contrast>.tsv`` and its JSON sidecar (columns, the run's settings and its ``calibration_basis``)."""
    lines = ["\t".join(COLUMNS)]
    for row in rows:
        values = [getattr(row, c) for c in COLUMNS]
        lines.append("\t".join("n/a" if v is None else f"{v:.6g}" if isinstance(v, float) else str(v) for v in values))
    write_text(path, "\n".join(lines) + "\n")
    reduced = settings.nulls.permutations < settings.study_permutations
    sidecar = dict(SIDECAR)
    sidecar["Calibration"] = {
        "contrast": settings.contrast,
        "datasets": settings.datasets,
        "seed": settings.nulls.seed,
        "random_stream": "numpy SeedSequence([seed, 0xCA11, crc32(contrast), dataset index])",
        "permutations": settings.nulls.permutations,
        "study_permutations": settings.study_permutations,
        "permutations_reduced": reduced,
        "permutation_table_rows": table_rows,
        "alpha": settings.alpha,
        "family": "each contrast on its own (per-contrast), whatever inference.family says",
        "null_datasets": "subjects' own maps with random sign flips (one-sample, paired, weighted), shuffled subject "
        "order against fixed labels or covariate (two-sample, between-groups, correlation), conditions shuffled "
        "within subject (repeated measures), or the reduced model's fit plus its residuals in a shuffled subject "
        "order (regression, Freedman-Lane style)",
        "basis": basis,
    }
    write_json(path.with_suffix(".json"), sidecar)


def read_table(path: Path) -> list[dict]:
    """Rows of a calibration TSV (numbers as float, 'n/a' kept)."""
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    for row in rows:
        for key, value in row.items():
            if key not in ("correction", "method") and value != "n/a":
                row[key] = float(value)
    return rows


def summarize(
    shard_files: list[Path], out: Path, *, settings: CalibrationSettings, subjects: Path, observed: Path
) -> list[CalibrationRow]:
    """Merge the shard files and write ``<contrast>.tsv``, ``.json``, ``.png`` and ``.svg``.

    Parameters
    ----------
    shard_files : list of path
        Every ``shard-<k>.npz`` of the contrast.
    out : path
        The TSV to write; the others are written beside it.
    settings : CalibrationSettings
        The calibration settings.
    subjects, observed : path
        The contrast's ``subjects.npz`` and ``observed.npz``: their contents'
        fingerprints go into the sidecar, so that the report can tell when
        the calibration no longer matches the results.
    """
    shards = []
    for path in shard_files:
        with np.load(path, allow_pickle=False) as archive:
            shards.append({key: archive[key] for key in archive.files})
            if str(archive["settings"]) != to_json(settings):
                raise UserError(f"{path} was computed with other calibration settings; delete it and rerun")
    merged = merge_shards(shards, datasets=settings.datasets)
    table_rows = int(shards[0]["table_rows"]) or None
    rows = calibration_rows(merged, settings=settings, table_rows=table_rows)
    out = Path(out)
    basis = calibration_basis(Path(subjects).parent, [c.record() for c in settings.corrections])
    write_table(out, rows, settings=settings, table_rows=table_rows, basis=basis)
    calibration_figure(read_table(out), contrast=settings.contrast, folder=out.parent, stem=out.stem)
    return rows


def calibration_figure(rows: list[dict], *, contrast: str, folder: Path, stem: str) -> bytes:
    """FWER of each correction with its 95% interval and nominal level; writes PNG and SVG, returns the PNG."""
    import matplotlib.pyplot as plt

    from famwise.figure_style import ACCENT, MUTED, figure_style, save_figure

    fwer = np.array([r["fwer"] for r in rows])
    low = np.array([r["fwer_ci_low"] for r in rows])
    high = np.array([r["fwer_ci_high"] for r in rows])
    corrected = np.array([r["method"] != UNCORRECTED for r in rows])
    # Scale to the corrections (and twice the nominal level); rates above it are marked at the top.
    top = max(0.15, 2 * max(r["nominal"] for r in rows), 1.15 * float(high[corrected].max(initial=0)))
    top = min(1.0, top)
    with figure_style():
        figure, ax = plt.subplots(figsize=(0.75 * len(rows) + 1.8, 3.0))
        where = np.arange(len(rows))
        for x, row in zip(where, rows):
            ax.hlines(row["nominal"], x - 0.38, x + 0.38, colors=MUTED, linestyles="--", linewidth=1.0)
        inside = fwer <= top
        ax.errorbar(
            where[inside],
            fwer[inside],
            yerr=[(fwer - low)[inside], (np.minimum(high, top) - fwer)[inside]],
            fmt="o",
            color=ACCENT,
            markersize=4.5,
            capsize=3,
            linewidth=1.0,
            clip_on=False,
        )
        for x, value in zip(where[~inside], fwer[~inside]):
            ax.plot([x], [top], marker="^", color=ACCENT, markersize=6, clip_on=False)
            ax.annotate(f"{value:.2f}", (x, top), xytext=(7, -3), textcoords="offset points", fontsize=7.5, va="top")
        ax.set_xticks(where, [r["correction"] for r in rows], rotation=30, ha="right")
        ax.set_xlim(-0.6, len(rows) - 0.4)
        ax.set_ylim(0, top)
        ax.set_xlabel("correction")
        ax.set_ylabel("family-wise error rate\n(share of null datasets)")
        n = int(rows[0]["datasets"])
        ax.set_title(f"{contrast}: error rate in {n} null datasets")
        ax.text(
            1.0,
            1.0,
            "dashes: nominal level\nbars: 95% interval\n\u25b2 off scale (value shown)",
            transform=ax.transAxes,
            ha="right",
            va="bottom",
            fontsize=7,
            color=MUTED,
        )
        return save_figure(figure, folder, stem)


def calibration_basis(contrast_folder: Path, corrections: list[dict]) -> dict:
    """What a calibration describes: the contents of the contrast's subject maps and observed statistics
    (SHA-256 over every array's name, dtype, shape and bytes) and each correction's method settings,
    alpha and tail. Missing files give None."""
    return {
        "subjects_sha256": _arrays_sha256(contrast_folder / "subjects.npz"),
        "observed_sha256": _arrays_sha256(contrast_folder / "observed.npz"),
        "corrections": [
            {key: c[key] for key in ("correction", "alpha", "tail", "forming") if key in c} for c in corrections
        ],
    }


def _arrays_sha256(path: Path) -> str | None:
    if not path.is_file():
        return None
    digest = hashlib.sha256()
    with np.load(path, allow_pickle=False) as archive:
        for name in sorted(archive.files):
            values = np.ascontiguousarray(archive[name])
            digest.update(f"{name}|{values.dtype.str}|{values.shape}|".encode())
            digest.update(values.tobytes())
    return digest.hexdigest()
