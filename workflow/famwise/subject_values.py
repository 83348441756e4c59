"""Each subject's mean over a significant cluster's (or TFCE region's) points.

A stage after the correction: for every significant cluster or region of one
contrast and correction, the mean of each subject's values over the region's
(channel, frequency, time) points, per condition (from ``tf/sub-<id>.npz``)
and for the tested contrast (from ``contrasts/<c>/subjects.npz``: the paired
difference, or the one condition of a one-sample, two-sample or correlation
test). Written to ``contrasts/<c>/<correction>/subject_values.tsv`` with a
JSON sidecar.

These values were selected by the same data the test used: they overstate
the effect and must not be tested again (Kriegeskorte N, Simmons WK,
Bellgowan PSF, Baker CI (2009). Circular analysis in systems neuroscience:
the dangers of double dipping. Nature Neuroscience 12:535-540).

The job ``subject-values`` of :mod:`famwise.jobs` runs it (``planned-values``
the spec's planned regions, :mod:`famwise.planned_values`).
"""

import csv
import json
from pathlib import Path

import numpy as np

from famwise.atomic import write_text
from famwise.contrast_words import weighted_formula
from famwise.design import ContrastData, load_contrast
from famwise.errors import UserError
from famwise.settings import SubjectValuesSettings
from famwise.spec.contrast_design import contrast_weights

CAVEAT = (
    "Selected by the same data the test used (circular analysis; Kriegeskorte et al. 2009, "
    "Nature Neuroscience 12:535-540): these values overstate the effect and must not be tested again."
)


def region_means(values: np.ndarray, labels: np.ndarray, ids: list[int]) -> np.ndarray:
    """Mean of each row of ``values`` over the points of each label.

    Parameters
    ----------
    values : ndarray of float, shape (n_subjects, n_points)
        Points flatten (n_channels, n_freqs, n_times).
    labels : ndarray of int, shape (n_points,)
        Cluster or region label of each point (0 = none).
    ids : list of int
        The labels to average over (each must label at least one point).

    Returns
    -------
    ndarray of float64, shape (n_subjects, len(ids))
    """
    values = np.asarray(values)
    out = np.empty((values.shape[0], len(ids)))
    for k, ident in enumerate(ids):
        points = np.flatnonzero(labels == ident)
        if points.size == 0:
            raise UserError(f"subject values: cluster {ident} has no point in the cluster_id map; rerun the correction")
        out[:, k] = values[:, points].astype(np.float64).mean(axis=1)
    return out


def _axis_index(found: np.ndarray, wanted: np.ndarray, what: str, path: Path) -> np.ndarray:
    index = np.array([int(np.argmin(np.abs(found - w))) for w in wanted])
    if index.size and not np.allclose(found[index], wanted, rtol=0, atol=1e-9):
        raise UserError(f"subject values: {path} lacks {what} of the contrast; rerun the contrast stage")
    return index


def condition_means(
    files: list[Path], data: ContrastData, conditions: list[str], labels: np.ndarray, ids: list[int]
) -> np.ndarray:
    """Each subject's mean per condition over each label's points, from the time-frequency files.

    Parameters
    ----------
    files : list of Path
        ``tf/sub-<id>.npz`` in the order of ``data.subjects``.
    data : ContrastData
        The contrast's data (its channels, frequencies and times locate the region).
    conditions : list of str
    labels : ndarray of int, shape (n_points,)
    ids : list of int

    Returns
    -------
    ndarray of float64, shape (n_subjects, len(conditions), len(ids))
    """
    from famwise.decomposition import load_maps  # numba-backed package: loaded only here

    if len(files) != len(data.subjects):
        raise UserError(f"subject values: {len(files)} time-frequency files for {len(data.subjects)} subjects")
    out = np.empty((len(files), len(conditions), len(ids)))
    for s, path in enumerate(files):
        tf = load_maps(path)
        lookup = {c: i for i, c in enumerate(tf.channels)}
        missing = [c for c in data.channels if c not in lookup]
        if missing:
            raise UserError(f"subject values: {path} lacks the channels {missing}; rerun the contrast stage")
        region = np.ix_(
            [lookup[c] for c in data.channels],
            _axis_index(tf.freqs, data.freqs, "frequencies", path),
            _axis_index(tf.times, data.times, "times", path),
        )
        for k, name in enumerate(conditions):
            if name not in tf.conditions:
                raise UserError(f"subject {data.subjects[s]}: condition '{name}' has no maps in {path}")
            values = tf.values[tf.conditions.index(name)][region].reshape(1, -1)
            out[s, k] = region_means(values, labels, ids)[0]
    return out


def significant_ids(result: Path, alpha: float | None = None) -> tuple[np.ndarray, list[dict], str]:
    """The cluster_id map (flat), the clusters.tsv rows with p <= alpha (table order) and the method.

    ``alpha`` defaults to the one stored in the result's settings.
    """
    with np.load(result, allow_pickle=False) as archive:
        if "cluster_id" not in archive.files:
            raise UserError(f"subject values: {result} has no cluster_id map (only cluster and TFCE results do)")
        labels = np.asarray(archive["cluster_id"]).reshape(-1)
        stored = json.loads(str(archive["settings"])) if "settings" in archive.files else {}
        method = str(archive["method"]) if "method" in archive.files else "cluster"
    alpha = float(stored.get("alpha", 0.05)) if alpha is None else alpha
    table = result.with_name("clusters.tsv")
    if not table.is_file():
        raise UserError(f"subject values: expected the cluster table at {table}; rerun the correction")
    with open(table, newline="", encoding="utf-8") as handle:
        rows = [
            {"id": int(row["id"]), "sign": row["sign"], "p": float(row["p"]), "n_points": int(row["n_points"])}
            for row in csv.DictReader(handle, delimiter="\t")
        ]
    return labels, [row for row in rows if row["p"] <= alpha], method


def subject_value_rows(
    data: ContrastData,
    condition_values: np.ndarray,
    conditions: list[str],
    rows: list[dict],
    labels: np.ndarray,
    groups: list[str] | None,
) -> list[dict]:
    """One row per (cluster, subject): id, sign, p, n_points, subject, [group], [covariate], conditions, contrast."""
    ids = [int(row["id"]) for row in rows]
    contrast = None if data.x.ndim == 3 else region_means(data.x, labels, ids)
    out = []
    for k, row in enumerate(rows):
        for s, subject in enumerate(data.subjects):
            line = {
                "id": ids[k],
                "sign": row["sign"],
                "p": float(row["p"]),
                "n_points": int(row["n_points"]),
                "subject": subject,
            }
            if groups is not None:
                line["group"] = groups[int(data.groups[s])]
            if data.covariate is not None:
                line["covariate"] = float(data.covariate[s])
            line |= {name: float(condition_values[s, c, k]) for c, name in enumerate(conditions)}
            if contrast is not None:
                line["contrast"] = float(contrast[s, k])
            out.append(line)
    return out


def value_columns(
    test: str,
    conditions: list[str],
    measure: str,
    *,
    over: str,
    grouped: bool,
    covariate: str | None,
    weights: tuple[float, ...] | None = None,
) -> dict:
    """Descriptions of the columns every values table shares, from ``n_points`` on; ``over`` names the
    averaged points (e.g. "the cluster's points"); a ``measure`` starting with "voltage" has no frequency axis."""
    points = "(channel, time)" if measure.startswith("voltage") else "(channel, frequency, time)"
    described = {
        "n_points": {"Description": f"Number of {points} points averaged over."},
        "subject": {"Description": "Subject id."},
    }
    if grouped:
        described["group"] = {"Description": "The subject's group."}
    if covariate:
        role = "the correlation's covariate" if test == "correlation" else "the regression's tested covariate"
        described["covariate"] = {"Description": f"The subject's {covariate} ({role})."}
    for name in conditions:
        described[name] = {"Description": f"Mean of the subject's {name} map ({measure}) over {over}."}
    if test != "repeated-measures":
        what = weighted_formula(conditions, contrast_weights(test, len(conditions), weights))
        described["contrast"] = {"Description": f"Mean over {over} of the value the test used ({what}; {measure})."}
    return described


def sidecar(
    test: str,
    conditions: list[str],
    measure: str,
    *,
    noun: str,
    grouped: bool,
    covariate: str | None = None,
    weights: tuple[float, ...] | None = None,
) -> dict:
    """Column descriptions of subject_values.tsv; ``measure`` describes the maps' values and unit."""
    described = {
        "id": {"Description": f"{noun.capitalize()} number as in clusters.tsv and the cluster_id map."},
        "sign": {"Description": f"Sign of the statistic in the {noun}."},
        "p": {"Description": f"The {noun}'s p as in clusters.tsv."},
    }
    described |= value_columns(
        test, conditions, measure, over=f"the {noun}'s points", grouped=grouped, covariate=covariate, weights=weights
    )
    described["Caveat"] = CAVEAT
    return described


def write_subject_values(path: Path, lines: list[dict], columns: dict) -> None:
    """Write the TSV (columns in sidecar order) and its JSON sidecar atomically."""
    names = [k for k in columns if k != "Caveat"]
    text = ["\t".join(names)]
    for line in lines:
        text.append("\t".join(repr(line[n]) if isinstance(line[n], float) else str(line[n]) for n in names))
    write_text(path, "\n".join(text) + "\n")
    write_text(Path(path).with_suffix(".json"), json.dumps(columns, indent=2) + "\n")


def run(settings: SubjectValuesSettings, subjects: Path, result: Path, tf_files: list[Path], out: Path) -> None:
    """The stage: one contrast's data, one correction's result -> subject_values.tsv and .json."""
    conditions = list(settings.conditions)
    data = load_contrast(subjects)
    labels, rows, method = significant_ids(result)
    if labels.size != int(np.prod(data.shape)):
        raise UserError(
            f"subject values: {result} has {labels.size} points, the contrast {int(np.prod(data.shape))}; "
            "rerun the correction"
        )
    values = condition_means(tf_files, data, conditions, labels, [int(r["id"]) for r in rows])
    groups = list(settings.group_names) if settings.group_names is not None else None
    lines = subject_value_rows(data, values, conditions, rows, labels, groups)
    columns = sidecar(
        settings.test,
        conditions,
        measure_text(tf_files[0]),
        noun="region" if method == "tfce" else "cluster",
        grouped=groups is not None,
        covariate=settings.covariate_name if data.covariate is not None else None,
        weights=settings.weights,
    )
    write_subject_values(out, lines, columns)


def measure_text(path: Path) -> str:
    """The measure and baseline of a time-frequency file in words, e.g. ``power, dB change ...``."""
    with np.load(path, allow_pickle=False) as archive:
        return f"{archive['measure']}, {archive['baseline']}"
