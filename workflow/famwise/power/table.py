"""Power shards -> the power table (TSV + JSON sidecar), per effect level, sample size and correction.

Intervals (Monte Carlo 95%):

- power and the false-positive rate are shares of independent simulated
  studies: exact binomial (Clopper & Pearson 1934) intervals, as in the
  calibration table;
- the share of the region recovered is a mean over studies: mean +- 1.96
  standard errors (normal approximation by the central limit theorem, common
  practice, no source), clipped to [0, 1].

The smallest sample size reaching the target is the smallest simulated n
whose power estimate is at least the target; ``n_target_sure`` asks the
same of the interval's lower end. Neither interpolates between simulated
sizes.

References
----------
Clopper CJ, Pearson ES (1934). The use of confidence or fiducial limits
illustrated in the case of the binomial. Biometrika 26(4):404-413.
"""

import csv
import json
from pathlib import Path

import numpy as np

from famwise.atomic import write_json, write_text
from famwise.axes import is_voltage
from famwise.calibrate.settings import UNCORRECTED
from famwise.calibrate.table import calibration_basis, fwer_interval
from famwise.errors import UserError
from famwise.settings import PowerShardSettings, PowerTableSettings
from famwise.settings_codec import to_json, to_plain

COLUMNS = (
    "effect",
    "n",
    "correction",
    "method",
    "studies",
    "detections",
    "power",
    "power_ci_low",
    "power_ci_high",
    "recovered",
    "recovered_ci_low",
    "recovered_ci_high",
    "false_positive_studies",
    "false_positive_rate",
    "false_positive_ci_low",
    "false_positive_ci_high",
    "permutations",
    "permutations_computed",
)
SIDECAR = {
    "effect": {
        "Description": "Effect level: 'pilot-x<f>' is the pilot's observed effect times f inside the effect region; "
        "'d-<d>' a standardised size d (Cohen's f for between-groups, Pearson's r for correlation, partial r for "
        "regression) inside it. Zero outside the region."
    },
    "n": {
        "Description": "Participants per simulated study (two-sample, between-groups: in total, split as in the pilot)."
    },
    "correction": {
        "Description": "Correction name as in the study spec; 'uncorrected' is the reference row: parametric "
        "p <= alpha at a point, no correction."
    },
    "method": {"Description": "Correction method."},
    "studies": {"Description": "Simulated studies."},
    "detections": {"Description": "Studies in which at least one point of the effect region is significant."},
    "power": {"Description": "detections / studies."},
    "power_ci_low": {
        "Description": "Lower end of the exact binomial (Clopper-Pearson) 95% Monte Carlo interval of power."
    },
    "power_ci_high": {
        "Description": "Upper end of the exact binomial (Clopper-Pearson) 95% Monte Carlo interval of power."
    },
    "recovered": {"Description": "Mean over studies of the share of the effect region's points that are significant."},
    "recovered_ci_low": {"Description": "recovered - 1.96 standard errors over studies (clipped at 0)."},
    "recovered_ci_high": {"Description": "recovered + 1.96 standard errors over studies (clipped at 1)."},
    "false_positive_studies": {
        "Description": "Studies with a significant point outside the effect region, where the true "
        "effect is zero; n/a when the region is the whole analysed map."
    },
    "false_positive_rate": {"Description": "false_positive_studies / studies."},
    "false_positive_ci_low": {"Description": "Lower end of the Clopper-Pearson 95% interval of false_positive_rate."},
    "false_positive_ci_high": {"Description": "Upper end of the Clopper-Pearson 95% interval of false_positive_rate."},
    "permutations": {
        "Description": "Random permutations each simulated study was tested with (all of them when the "
        "table is exact); n/a for corrections on parametric p-values."
    },
    "permutations_computed": {
        "Description": "Mean permutations actually computed per study for a max-statistic, cluster or TFCE "
        "correction: a study's null stops once more than alpha of the table reaches the observed largest value, "
        "when no point can be significant whatever the rest holds, so the decision is the full table's "
        "(famwise.power.sequential); n/a for the other corrections."
    },
}


def merge_shards(shards: list[dict], *, studies: int) -> dict[str, np.ndarray]:
    """Join one (effect, n)'s shard arrays in study order; every study 0..studies-1 must be there once."""
    indices = np.concatenate([c["studies"] for c in shards])
    order = np.argsort(indices, kind="stable")
    if not np.array_equal(indices[order], np.arange(studies)):
        raise UserError(
            f"power: the shard files hold {indices.size} studies, expected studies 0 to {studies - 1} once "
            "each; delete the power folder and rerun"
        )
    return {
        key: np.concatenate([c[key] for c in shards])[order]
        for key in ("detected", "recovered", "outside", "rows_used")
    }


def recovered_interval(values: np.ndarray) -> tuple[float, float]:
    """Mean +- 1.96 standard errors, clipped to [0, 1] (0-width for a single study)."""
    if values.size < 2:
        return float(values.mean()), float(values.mean())
    half = 1.96 * values.std(ddof=1) / np.sqrt(values.size)
    return max(0.0, float(values.mean() - half)), min(1.0, float(values.mean() + half))


def power_rows(merged: dict, *, labels: list[str], settings: PowerShardSettings, table_rows: int) -> list[dict]:
    """Table rows of one effect level and sample size (one per correction, 'uncorrected' first)."""
    entries = {c.correction.label: c.correction for c in settings.corrections}
    rows = []
    for column, label in enumerate(labels):
        entry = entries.get(label)
        method = entry.method if entry is not None else UNCORRECTED
        uses_null = method in ("max-stat", "cluster", "tfce") or (entry is not None and entry.pvalues == "permutation")
        detected = merged["detected"][:, column]
        studies, hits = int(detected.size), int(detected.sum())
        low, high = fwer_interval(hits, studies)
        recovered = merged["recovered"][:, column]
        outside = merged["outside"][:, column]
        row = {
            "effect": settings.effect.tag,
            "n": settings.n,
            "correction": label,
            "method": method,
            "studies": studies,
            "detections": hits,
            "power": hits / studies,
            "power_ci_low": low,
            "power_ci_high": high,
            "recovered": float(recovered.mean()),
            "permutations": table_rows - 1 if uses_null and table_rows else None,
            "permutations_computed": None,
        }
        used = merged["rows_used"][:, column]
        if used.any():
            row["permutations_computed"] = float(used.mean()) - 1
        row["recovered_ci_low"], row["recovered_ci_high"] = recovered_interval(recovered)
        if np.isnan(outside).all():
            row.update(
                false_positive_studies=None,
                false_positive_rate=None,
                false_positive_ci_low=None,
                false_positive_ci_high=None,
            )
        else:
            false = int(np.nansum(outside))
            fp_low, fp_high = fwer_interval(false, studies)
            row.update(
                false_positive_studies=false,
                false_positive_rate=false / studies,
                false_positive_ci_low=fp_low,
                false_positive_ci_high=fp_high,
            )
        rows.append(row)
    return rows


def smallest_n(rows: list[dict], *, target: float) -> dict[str, dict[str, dict]]:
    """effect -> correction -> {"n_target": smallest n with power >= target, "n_target_sure": with its lower end >= target}."""
    found: dict[str, dict[str, dict]] = {}
    for row in sorted(rows, key=lambda r: r["n"]):
        entry = found.setdefault(row["effect"], {}).setdefault(
            row["correction"], {"n_target": None, "n_target_sure": None}
        )
        if entry["n_target"] is None and row["power"] >= target:
            entry["n_target"] = row["n"]
        if entry["n_target_sure"] is None and row["power_ci_low"] >= target:
            entry["n_target_sure"] = row["n"]
    return found


def power_basis(contrast_folder: Path, corrections: list[dict]) -> dict:
    """What a power table describes: the pilot's subject maps and each correction's settings.

    As `famwise.calibrate.table.calibration_basis`, without the observed map,
    which the simulation does not read. ``corrections`` are the settings
    records of the corrections (``CorrectionSettings.record()``).
    """
    basis = calibration_basis(Path(contrast_folder), corrections)
    del basis["observed_sha256"]
    return basis


def summarize(shard_files: list[Path], out: Path, *, settings: PowerTableSettings, subjects: Path) -> list[dict]:
    """Merge a contrast's shards; write ``<contrast>.tsv`` and ``.json`` beside ``out``; return the rows.

    ``subjects`` is the pilot's ``contrasts/<c>/subjects.npz`` (hashed into the sidecar's ``basis``).
    """
    expected = {(level.effect.tag, level.n): level for level in settings.levels}
    grouped: dict[tuple[str, int], list[dict]] = {}
    for path in shard_files:
        with np.load(path, allow_pickle=False) as archive:
            arrays = {key: archive[key] for key in archive.files}
        found = json.loads(str(arrays["settings"]))
        key = (found["effect"]["tag"], found["n"])
        if key not in expected or str(arrays["settings"]) != to_json(expected[key]):
            raise UserError(f"{path} was computed with other power settings; delete it and rerun")
        grouped.setdefault(key, []).append(arrays)
    rows, regions = [], {}
    for key, level in expected.items():
        parts = grouped.get(key)
        if not parts:
            raise UserError(f"power: no shard files for effect {key[0]}, n {key[1]}")
        merged = merge_shards(parts, studies=level.studies)
        labels = [str(x) for x in parts[0]["labels"]]
        rows += power_rows(merged, labels=labels, settings=level, table_rows=int(parts[0]["table_rows"]))
        regions[level.effect.tag] = (int(parts[0]["region_points"]), int(parts[0]["points"]))
    basis = power_basis(Path(subjects).parent, [c.record() for c in settings.levels[0].corrections])
    write_table(Path(out), rows, settings=settings, regions=regions, basis=basis, design=pilot_design(Path(subjects)))
    return rows


def pilot_design(subjects: Path) -> dict:
    """The pilot's test and map kind (``"voltage"`` or ``"time-frequency"``), for the sidecar and the methods text."""
    with np.load(subjects, allow_pickle=False) as archive:
        return {"test": str(archive["test"]), "maps": "voltage" if is_voltage(archive["freqs"]) else "time-frequency"}


def write_table(
    path: Path, rows: list[dict], *, settings: PowerTableSettings, regions: dict, basis: dict, design: dict
) -> None:
    """The TSV and its JSON sidecar (columns, the simulation's settings, the smallest n per correction, its basis).

    ``design`` is `pilot_design`'s test and map kind.
    """
    lines = ["\t".join(COLUMNS)]
    for row in rows:
        values = [row[c] for c in COLUMNS]
        lines.append("\t".join("n/a" if v is None else f"{v:.6g}" if isinstance(v, float) else str(v) for v in values))
    write_text(path, "\n".join(lines) + "\n")
    first = settings.levels[0]
    effect = {key: value for key, value in to_plain(first.effect).items() if key not in ("tag", "size")}
    sidecar = dict(SIDECAR)
    sidecar["Power"] = {
        "contrast": settings.contrast,
        **design,
        "target": settings.target,
        "smallest_n": smallest_n(rows, target=settings.target),
        "effect": effect,
        "region_points": {tag: {"region": r, "analysed": p} for tag, (r, p) in regions.items()},
        "studies": first.studies,
        "permutations": first.nulls.permutations,
        "study_permutations": first.study_permutations,
        "alpha": first.alpha,
        "seed": first.nulls.seed,
        "random_stream": "numpy SeedSequence([seed, 0x9043, crc32(contrast), crc32(effect), n, study index])",
        "simulation": "residual maps of the pilot (subject minus the design's fit, scaled by sqrt(n / (n - q))) drawn "
        "with replacement (two-sample, between-groups: within each group, n split as in the pilot; correlation, "
        "regression: with their covariate rows, regression redrawn while rank-deficient; one-sample, paired, "
        "weighted, between-groups, regression: with a random sign), plus the effect inside the region, zero outside",
        "intervals": "power, false_positive_rate: exact binomial (Clopper-Pearson 1934) 95%; recovered: mean +- 1.96 SE",
        "assumptions": ASSUMPTIONS,
        "basis": basis,
    }
    write_json(path.with_suffix(".json"), sidecar)


ASSUMPTIONS = [
    "The pilot's noise structure (its between-subject spread and its smoothness over channels, frequencies and "
    "times) is taken as representative of the planned study.",
    "The effect is the stated one: the pilot's observed effect times the stated factor, or the stated standardised "
    "size, inside the region and zero outside it.",
    "A pilot's observed effect is inflated by selection (effects that looked large enough led to the study); "
    "power at factor 1 is optimistic, factors below 1 are the safer plan.",
    "Resampling with replacement from a few pilot subjects shows no spread beyond theirs; a small pilot "
    "understates rare extreme subjects.",
]


def read_table(path: Path) -> list[dict]:
    """Rows of a power TSV (numbers as float, 'n/a' as None)."""
    with open(path, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    for row in rows:
        for key, value in row.items():
            if key not in ("effect", "correction", "method"):
                row[key] = None if value == "n/a" else float(value)
    return rows
