"""A small synthetic run output folder for the report tests (invented values).

It imitates what the statistics and correction stages write (layout in
DESIGN.md, "Data contracts"): an effect in the alpha band over parietal
channels (condition ``attend`` above ``ignore``) and a weaker negative blob.
Masks and cluster rows are made up to be self-consistent; they are not the
output of the real corrections.
"""

import csv
import json
from pathlib import Path

import numpy as np
from scipy import stats

from famwise.decomposition.maps import TimeFreqMaps
from famwise.design import ContrastData
from famwise.electrodes import match_channels, neighbor_graph, save_graph, system_positions
from famwise.planned_values import run_planned
from famwise.settings import SubjectValuesSettings
from famwise.settings_codec import from_plain
from famwise.subject_values import run as run_subject_values

CHANNELS = [
    "Fp1",
    "Fp2",
    "F7",
    "F3",
    "Fz",
    "F4",
    "F8",
    "T7",
    "C3",
    "Cz",
    "C4",
    "T8",
    "P7",
    "P3",
    "Pz",
    "P4",
    "P8",
    "O1",
    "Oz",
    "O2",
]
CONDITIONS = ["attend", "ignore"]
CORRECTIONS = [
    {"name": "holm", "method": "holm", "level": None, "pvalues": "parametric"},
    {"name": "fdr", "method": "fdr-bh", "level": 0.05, "pvalues": "parametric"},
    {"name": None, "method": "max-stat", "step_down": True},
    {
        "name": "clusters",
        "method": "cluster",
        "forming_p": 0.01,
        "forming_stat": None,
        "cluster_stat": "mass",
        "dims": ["channel", "freq", "time"],
        "min_supra_neighbors": 0,
    },
    {"name": "tfce", "method": "tfce", "E": 0.5, "H": 2.0, "step": None, "dims": ["channel", "freq", "time"]},
]


def study_dict(*, alpha: float = 0.05, permutations: int = 999, statistic: str = "t") -> dict:
    """The spec as ``model_dump(mode="json")`` would give it."""
    return {
        "version": 1,
        "name": "attention alpha",
        "output": "results",
        "seed": 7,
        "subjects": {
            "source": "bids",
            "path": "data",
            "task": None,
            "ids": None,
            "groups": None,
            "covariates": None,
            "exclude": {"11": "left the session early"},
            "min_epochs": 10,
        },
        "conditions": {"attend": ["att"], "ignore": ["ign"]},
        "epochs": {"window_ms": [-500.0, 1000.0], "reject_peak_to_peak_uv": 150.0, "reference": "average"},
        "decomposition": {
            "method": "morlet",
            "frequencies": {"lowest_hz": 4.0, "highest_hz": 30.0, "count": 8, "spacing": "log"},
            "cycles": [3.0, 7.0],
            "fwhm_ms": None,
            "window_ms": None,
            "nw": None,
            "measure": "power",
            "time_step_ms": 20.0,
            "average": "mean",
            "trim": 0.2,
            "baseline": {"mode": "db", "window_ms": [-400.0, -100.0], "pooled": False, "single_epoch": False},
        },
        "analysis": {"time_ms": [-200.0, 600.0], "freq_hz": None, "channels": None},
        "channels": {
            "positions": "10-10",
            "neighbors": {"method": "distance", "max_distance_mm": 75.0, "edges_file": None},
        },
        "contrasts": [
            {"name": "attention", "test": "paired", "conditions": CONDITIONS, "groups": None, "covariate": None}
        ],
        "inference": {
            "alpha": alpha,
            "tail": "two-sided",
            "statistic": statistic,
            "trim": 0.2,
            "equal_var": True,
            "permutations": permutations,
            "shards": 2,
            "family": "per-contrast",
            "corrections": CORRECTIONS,
        },
    }


def _save(path: Path, **arrays) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    np.savez(path, **arrays)


def _subjects(folder: Path, n_included: int) -> None:
    rng = np.random.default_rng(3)
    columns = (
        ["subject", "status", "reason", "group"]
        + [f"n_{c}" for c in CONDITIONS]
        + [f"rejected_{c}" for c in CONDITIONS]
    )
    rows = []
    for i in range(n_included):
        kept = rng.integers(38, 60, size=2)
        rows.append([f"{i + 1:02d}", "included", "", ""] + kept.tolist() + (60 - kept).tolist())
    rows.append(["11", "excluded", "left the session early", "n/a", "n/a", "n/a", "n/a", "n/a"])
    with open(folder / "subjects.tsv", "w", newline="") as handle:
        writer = csv.writer(handle, delimiter="\t", lineterminator="\n")
        writer.writerow(columns)
        writer.writerows(rows)


def _cluster_row(ident: int, points: np.ndarray, stat: np.ndarray, p: float, channels, freqs, times_ms) -> dict:
    c, f, t = np.nonzero(points)
    strength = np.where(points, np.abs(stat), -np.inf)
    pc, pf, pt = np.unravel_index(np.argmax(strength), stat.shape)
    return {
        "id": ident,
        "sign": "+" if stat[pc, pf, pt] > 0 else "-",
        "statistic": float(np.abs(stat[points]).sum()),
        "p": p,
        "n_points": int(points.sum()),
        "channels": ",".join(channels[i] for i in sorted(set(c))),
        "time_start_ms": float(times_ms[t.min()]),
        "time_end_ms": float(times_ms[t.max()]),
        "freq_low_hz": float(freqs[f.min()]),
        "freq_high_hz": float(freqs[f.max()]),
        "peak_stat": float(stat[pc, pf, pt]),
        "peak_channel": channels[pc],
        "peak_freq_hz": float(freqs[pf]),
        "peak_time_ms": float(times_ms[pt]),
    }


def write_output(
    folder: Path,
    *,
    n_included: int = 10,
    exact: bool = False,
    permutations: int = 999,
    alpha: float = 0.05,
    statistic: str = "t",
) -> dict:
    """Write a run output folder; returns the study dict.

    Parameters
    ----------
    folder : Path
        Output folder (created).
    n_included : int
        Included subjects (one more is listed as excluded).
    exact : bool
        Describe the null as an exact enumeration of 2**n sign flips.
    permutations : int
        Requested random permutations (Monte Carlo null).
    alpha : float
        The spec's alpha.
    statistic : str
        ``"t"`` or ``"yuen"``, as stored in the spec and the observed file.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    study = study_dict(alpha=alpha, permutations=permutations, statistic=statistic)
    (folder / "study.json").write_text(json.dumps(study, indent=2))
    _subjects(folder, n_included)
    positions = match_channels(system_positions("10-10"), CHANNELS)
    save_graph(
        folder / "channels" / "graph.npz", neighbor_graph(positions, method="distance", max_distance_mm=75.0), positions
    )

    rng = np.random.default_rng(11)
    freqs = np.geomspace(4.0, 30.0, 8)
    times = np.round(np.arange(-0.2, 0.6001, 0.02), 3)
    times_ms = times * 1000
    shape = (len(CHANNELS), len(freqs), len(times))
    stat = rng.normal(size=shape)
    parietal = np.array([c in {"P3", "Pz", "P4", "P7", "P8", "O1", "Oz", "O2"} for c in CHANNELS])
    alpha_band = np.exp(-0.5 * ((np.log(freqs) - np.log(10.0)) / 0.25) ** 2)
    window = np.exp(-0.5 * ((times - 0.35) / 0.09) ** 2)
    stat += 7.0 * parietal[:, None, None] * alpha_band[None, :, None] * window[None, None, :]
    frontal = np.array([c in {"Fp1", "Fp2", "Fz"} for c in CHANNELS])
    stat -= (
        3.5
        * frontal[:, None, None]
        * (freqs > 18)[None, :, None]
        * np.exp(-0.5 * ((times - 0.1) / 0.05) ** 2)[None, None, :]
    )
    n = n_included
    p = 2 * stats.t.sf(np.abs(stat), n - 1)
    effect = 0.45 * stat
    contrast = folder / "contrasts" / "attention"
    _save(
        contrast / "observed.npz",
        stat=stat,
        p=p,
        df=np.array(float(n - 1)),
        effect=effect,
        effect_size=stat / np.sqrt(n),
        channels=np.array(CHANNELS),
        freqs=freqs,
        times=times,
        test=np.str_("paired"),
        statistic=np.str_(statistic),
        n=np.array(n),
        tail=np.str_("two-sided"),
    )
    n_rows = 2**n if exact else permutations + 1
    smallest = 2 / n_rows if exact else 1 / (permutations + 1)
    info = {
        "n_rows": n_rows,
        "exact": exact,
        "scheme": "sign-flip",
        "permutations": permutations,
        "smallest_p": smallest,
    }
    (contrast / "nulls").mkdir(parents=True, exist_ok=True)
    (contrast / "nulls" / "info.json").write_text(json.dumps(info))

    null_rng = np.random.default_rng(5)
    for entry, cut in zip(CORRECTIONS, [4.6, 3.6, 4.1, 2.9, 3.2]):
        name = entry["name"] or entry["method"]
        mask = np.abs(stat) > cut
        arrays = {
            "p_corrected": np.where(mask, 0.01, 0.6),
            "mask": mask,
            "threshold": np.array(np.nan),
            "threshold_kind": np.str_("p"),
            "method": np.str_(entry["method"]),
            "settings": np.str_(
                json.dumps(
                    {
                        "correction": entry | {"label": name},
                        "alpha": alpha,
                        "tail": "two-sided",
                        "result": {"alpha": alpha},
                    }
                )
            ),
            "n_significant": np.array(int(mask.sum())),
        }
        if entry["method"] in {"holm", "fdr-bh"}:
            arrays["threshold"] = np.array(float(p[mask].max()))
        if entry["method"] == "max-stat":
            arrays |= {
                "null": np.abs(null_rng.normal(size=n_rows)) + 2.6,
                "threshold": np.array(cut),
                "threshold_kind": np.str_("stat"),
            }
        if entry["method"] == "tfce":
            tfce = np.sign(stat) * np.abs(stat) ** 2.5
            arrays |= {
                "null": null_rng.gamma(4.0, 6.0, size=n_rows),
                "tfce": tfce,
                "threshold": np.array(cut**2.5),
                "threshold_kind": np.str_("tfce"),
            }
        if entry["method"] == "cluster":
            positive = (stat > cut) & parietal[:, None, None]
            negative = (stat < -cut) & frontal[:, None, None]
            cluster_id = np.where(positive, 1, 0) + np.where(negative, -2, 0)
            rows = [_cluster_row(1, positive, stat, 0.004, CHANNELS, freqs, times_ms)]
            if negative.any():
                rows.append(_cluster_row(2, negative, stat, 0.31, CHANNELS, freqs, times_ms))
            mask = positive
            arrays |= {
                "mask": mask,
                "n_significant": np.array(int(mask.sum())),
                "cluster_id": cluster_id.astype(np.int32),
                "p_corrected": np.where(positive, 0.004, np.where(negative, 0.31, 1.0)),
                "null": null_rng.gamma(3.0, 12.0, size=n_rows),
                "threshold": np.array(150.0),
                "threshold_kind": np.str_("cluster"),
            }
            (contrast / name).mkdir(parents=True, exist_ok=True)
            with open(contrast / name / "clusters.tsv", "w", newline="") as handle:
                writer = csv.DictWriter(handle, fieldnames=list(rows[0]), delimiter="\t", lineterminator="\n")
                writer.writeheader()
                writer.writerows(rows)
            sidecar = {k: {"Description": f"column {k}"} for k in rows[0]}
            sidecar["time_start_ms"]["Units"] = "ms"
            (contrast / name / "clusters.json").write_text(json.dumps(sidecar))
        _save(contrast / name / "result.npz", **arrays)
    _subject_values(folder, contrast, n, freqs, times)
    return study


def _subject_values(folder: Path, contrast: Path, n: int, freqs: np.ndarray, times: np.ndarray) -> None:
    """Per-subject maps (invented) and the real subject-values stage on the cluster result."""
    rng = np.random.default_rng(17)
    subjects = tuple(f"{i + 1:02d}" for i in range(n))
    files = []
    for subject in subjects:
        values = rng.normal(size=(2, len(CHANNELS), len(freqs), len(times))).astype(np.float32)
        values[0] += 0.3
        files.append(folder / "tf" / f"sub-{subject}.npz")
        files[-1].parent.mkdir(parents=True, exist_ok=True)
        TimeFreqMaps(
            values=values,
            conditions=tuple(CONDITIONS),
            channels=tuple(CHANNELS),
            freqs=freqs,
            times=times,
            measure="power",
            baseline="dB change from -400 to -100 ms",
            n_epochs=np.array([40, 40]),
            valid=np.ones((len(freqs), len(times)), bool),
        ).save(files[-1])
    stacked = np.stack([np.load(f)["values"] for f in files])
    data = ContrastData(
        x=(stacked[:, 0] - stacked[:, 1]).reshape(n, -1),
        test="paired",
        subjects=subjects,
        channels=tuple(CHANNELS),
        freqs=freqs,
        times=times,
    )
    data.save(contrast / "subjects.npz")
    regions = [
        {"name": "parietal-alpha", "channels": ["P3", "Pz", "P4"], "freq_hz": [8.0, 13.0], "time_ms": [200.0, 500.0]}
    ]
    settings = from_plain(
        SubjectValuesSettings,
        {"test": "paired", "conditions": CONDITIONS, "group_names": None, "covariate_name": None, "regions": regions},
    )
    run_subject_values(
        settings,
        contrast / "subjects.npz",
        contrast / "clusters" / "result.npz",
        files,
        contrast / "clusters" / "subject_values.tsv",
    )
    run_planned(settings, contrast / "subjects.npz", files, contrast / "planned_values.tsv")
