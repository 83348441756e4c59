"""Read a run's output folder into plain records for the report.

The report only renders: everything here is read from the files the
statistics and correction stages wrote (layout in DESIGN.md, "Data
contracts"); nothing is recomputed.
"""

import csv
import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from famwise import layout, stage_warnings
from famwise.electrodes import ChannelGraph, Positions, load_graph
from famwise.errors import UserError
from famwise.observed import left_out_points, load_observed


@dataclass(frozen=True)
class ReportedCorrection:
    """One correction of one contrast, as stored in ``<correction>/result.npz``.

    Attributes
    ----------
    name : str
        Correction name as in the spec.
    method : str
        Method name (``"holm"``, ``"cluster"``, ``"tfce"``, ...).
    p_corrected : ndarray of float, shape (C, F, T)
        Corrected p per point.
    mask : ndarray of bool, shape (C, F, T)
        Significant points.
    threshold : float
        Corrected threshold, NaN when the method has none.
    threshold_kind : str
        ``"p"``, ``"stat"``, ``"cluster"`` or ``"tfce"``.
    settings : dict
        Parameters the method ran with.
    n_significant : int
        Number of significant points, as stored.
    null : ndarray of float, shape (rows,) or None
        Per-permutation maxima, when the method used a permutation null.
    tfce : ndarray of float, shape (C, F, T) or None
        TFCE-enhanced map (TFCE only).
    cluster_id : ndarray of int, shape (C, F, T) or None
        Cluster label per point, 0 outside clusters.
    clusters : list of dict
        Rows of ``clusters.tsv`` with numbers parsed (cluster methods only).
    cluster_columns : dict
        The ``clusters.json`` sidecar (column descriptions), may be empty.
    """

    name: str
    method: str
    p_corrected: np.ndarray
    mask: np.ndarray
    threshold: float
    threshold_kind: str
    settings: dict
    n_significant: int
    null: np.ndarray | None = None
    tfce: np.ndarray | None = None
    cluster_id: np.ndarray | None = None
    clusters: list[dict] = field(default_factory=list)
    cluster_columns: dict = field(default_factory=dict)

    @property
    def table_noun(self) -> str:
        """What a row of clusters.tsv is: "region" for TFCE (connected significant points), else "cluster"."""
        return "region" if self.threshold_kind == "tfce" else "cluster"


@dataclass(frozen=True)
class ReportedContrast:
    """One contrast: its observed maps, null summary and corrections.

    Attributes
    ----------
    name : str
        Contrast name as in the spec.
    stat, p, effect, effect_size : ndarray of float, shape (C, F, T)
        Observed statistic, parametric p, effect (mean difference, in the
        measure's unit) and standardised effect size.
    df : ndarray of float
        Degrees of freedom (per point or scalar).
    channels : list of str, length C
    freqs : ndarray of float, shape (F,)
        Frequencies in Hz.
    times : ndarray of float, shape (T,)
        Times in s.
    test, statistic, tail : str
        Test name, statistic (``"t"`` or ``"yuen"``) and tail.
    n : int
        Number of subjects in the contrast.
    nulls : dict
        ``nulls/info.json`` (n_rows, exact, scheme, permutations,
        smallest_p); empty when the contrast has no permutation null.
    corrections : list of ReportedCorrection
        In spec order.
    left_out : ndarray of bool, shape (C, F, T)
        Points the observed stage left out of the family (degenerate points).
    design_terms : tuple of str
        Regression: how each covariate was coded (tested first); empty otherwise.
    """

    name: str
    stat: np.ndarray
    p: np.ndarray
    effect: np.ndarray
    effect_size: np.ndarray
    df: np.ndarray
    channels: list[str]
    freqs: np.ndarray
    times: np.ndarray
    test: str
    statistic: str
    tail: str
    n: int
    nulls: dict
    corrections: list[ReportedCorrection]
    left_out: np.ndarray | None = None
    design_terms: tuple[str, ...] = ()


@dataclass(frozen=True)
class Run:
    """Everything the report shows about one run.

    Attributes
    ----------
    output_dir : Path
    study : dict
        The validated spec as JSON.
    subjects : list of dict
        Rows of ``subjects.tsv`` (values as strings).
    graph : ChannelGraph or None
        The channel neighbor graph, None when the run has no graph file.
    positions : Positions or None
        Positions (mm) of the graph's channels.
    contrasts : list of ReportedContrast
    warnings : list of str
        Warnings the decomposition jobs raised, one line per message naming its subjects.
    """

    output_dir: Path
    study: dict
    subjects: list[dict]
    graph: ChannelGraph | None
    positions: Positions | None
    contrasts: list[ReportedContrast]
    warnings: list[str] = field(default_factory=list)


def _text(value) -> str:
    return str(np.asarray(value).item()) if np.ndim(value) == 0 else str(value)


def _need(path: Path, what: str) -> Path:
    if not path.is_file():
        raise UserError(
            f"report: expected {what} at {path}, found no such file; run the earlier stages before the report"
        )
    return path


def correction_entries(study: dict) -> dict[str, dict]:
    """The spec's corrections by result-folder name (a correction without a name uses its method)."""
    entries = (study.get("inference") or {}).get("corrections", []) or []
    return {str(e.get("name") or e.get("method")): e for e in entries}


def read_tsv(path: Path) -> list[dict]:
    """Rows of a tab-separated file with a header line, values as strings."""
    with open(path, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle, delimiter="\t"))


def _number(value: str):
    try:
        number = float(value)
    except ValueError:
        return value
    return int(number) if number.is_integer() and "." not in value and "e" not in value.lower() else number


def read_clusters(folder: Path) -> tuple[list[dict], dict]:
    """Cluster rows (numbers parsed) and the column sidecar of a correction."""
    tsv = folder / "clusters.tsv"
    if not tsv.is_file():
        return [], {}
    rows = [
        {key: _number(value) if key != "channels" else value for key, value in row.items()} for row in read_tsv(tsv)
    ]
    sidecar = folder / "clusters.json"
    columns = json.loads(sidecar.read_text(encoding="utf-8")) if sidecar.is_file() else {}
    return rows, columns


def _read_correction(result_file: Path, name: str) -> ReportedCorrection:
    with np.load(_need(result_file, f"the result of correction '{name}'")) as data:
        keys = set(data.files)
        settings = _text(data["settings"]) if "settings" in keys else "{}"
        rows, columns = read_clusters(result_file.parent)
        return ReportedCorrection(
            name=name,
            method=_text(data["method"]) if "method" in keys else name,
            p_corrected=np.asarray(data["p_corrected"], dtype=float),
            mask=np.asarray(data["mask"], dtype=bool),
            threshold=float(data["threshold"]) if "threshold" in keys else float("nan"),
            threshold_kind=_text(data["threshold_kind"]) if "threshold_kind" in keys else "p",
            settings=json.loads(settings) if settings else {},
            n_significant=int(data["n_significant"])
            if "n_significant" in keys
            else int(np.count_nonzero(data["mask"])),
            null=np.asarray(data["null"], dtype=float) if "null" in keys else None,
            tfce=np.asarray(data["tfce"], dtype=float) if "tfce" in keys else None,
            cluster_id=np.asarray(data["cluster_id"]) if "cluster_id" in keys else None,
            clusters=rows,
            cluster_columns=columns,
        )


def _read_contrast(output_dir: Path, name: str, correction_names: list[str]) -> ReportedContrast:
    observed = _need(output_dir / layout.observed(name), f"the observed statistics of contrast '{name}'")
    info_path = output_dir / layout.null_info(name)
    nulls = json.loads(info_path.read_text(encoding="utf-8")) if info_path.is_file() else {}
    data = load_observed(observed)
    stat = np.asarray(data["stat"], dtype=float)
    if stat.ndim != 3:
        raise UserError(
            f"report: expected 'stat' in {observed} with shape (channels, frequencies, times), found shape {stat.shape}"
        )
    contrast = dict(
        name=name,
        stat=stat,
        p=np.asarray(data["p"], dtype=float),
        effect=np.asarray(data["effect"], dtype=float),
        effect_size=np.asarray(data["effect_size"], dtype=float),
        df=np.asarray(data["df"], dtype=float),
        channels=[str(c) for c in data["channels"]],
        freqs=np.asarray(data["freqs"], dtype=float),
        times=np.asarray(data["times"], dtype=float),
        test=_text(data["test"]),
        statistic=_text(data["statistic"]) if "statistic" in data else "t",
        tail=_text(data["tail"]) if "tail" in data else "two-sided",
        n=int(data["n"]),
        left_out=left_out_points(data).reshape(stat.shape),
        design_terms=tuple(str(term) for term in data.get("design_terms", ())),
    )
    corrections = [_read_correction(output_dir / layout.result(name, c), c) for c in correction_names]
    for correction in corrections:
        if correction.mask.shape != stat.shape:
            raise UserError(
                f"report: expected the mask of correction '{correction.name}' of "
                f"contrast '{name}' to have shape {stat.shape}, found "
                f"{correction.mask.shape}; rerun the corrections"
            )
    return ReportedContrast(nulls=nulls, corrections=corrections, **contrast)


def read_run(output_dir: Path) -> Run:
    """Read every result file of a run that the report shows.

    Parameters
    ----------
    output_dir : Path
        The run's output folder.

    Returns
    -------
    Run
    """
    output_dir = Path(output_dir)
    study = json.loads(_need(output_dir / layout.STUDY_RECORD, "the study spec").read_text(encoding="utf-8"))
    subjects_path = output_dir / layout.SUBJECTS_TABLE
    subjects = read_tsv(subjects_path) if subjects_path.is_file() else []
    names = list(correction_entries(study))
    contrasts = [_read_contrast(output_dir, c["name"], names) for c in study.get("contrasts", [])]
    graph_path = output_dir / layout.CHANNEL_GRAPH
    graph, positions = load_graph(graph_path) if graph_path.is_file() else (None, None)
    included = [row["subject"] for row in subjects if row.get("status", "included") == "included"]
    return Run(
        output_dir=output_dir,
        study=study,
        subjects=subjects,
        graph=graph,
        positions=positions,
        contrasts=contrasts,
        warnings=stage_warnings.gather(output_dir, included),
    )
