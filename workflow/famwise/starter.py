"""``famwise init``: a commented starter spec from the data found in a folder."""

import json
import os
import re
from collections import Counter
from pathlib import Path

import numpy as np

from famwise import bids
from famwise.atomic import write_text
from famwise.errors import UserError
from famwise.io import discover_pattern
from famwise.starter_designs import offered_contrasts


def write_starter_spec(data: Path, out: Path) -> None:
    """Look at ``data`` (a BIDS-EEG folder with EDF, BDF or `.vhdr` recordings, or a folder of epochs NPZ
    files) and write ``out``."""
    data = Path(data).resolve()
    out = Path(out).resolve()
    if not data.is_dir():
        raise UserError(f"{data}: no such folder")
    if out.exists():
        raise UserError(f"{out} exists already; remove it or choose another file with --out")
    relative = Path(os.path.relpath(data, out.parent)).as_posix()
    if relative.startswith(".."):
        raise UserError(
            f"{out}: the spec must sit in the data folder or above it (paths in a spec stay inside its folder)"
        )
    subjects = bids.discover_subjects(data)
    found = ""
    covariates = ([], [])
    groups = Counter()
    if subjects:
        recordings = [p for subject in subjects for p in bids.recording_files(data, subject)]
        if not recordings:
            raise UserError(
                f"{data}: the sub-* folders hold no recording famwise reads (sub-<id>_..._eeg.edf, .bdf "
                "or .vhdr); convert the recordings with a general-purpose converter to EDF or .vhdr"
            )
        source, path, task, labels = "bids", relative, _bids_task(recordings[0]), _bids_labels(recordings)
        found = _formats_found(recordings)
        covariates = participant_columns(data, subjects)
        groups = Counter(
            row["group"] for row in bids.read_participants(data).values() if row.get("group") not in (None, "", "n/a")
        )
    else:
        pattern = _epochs_pattern(data)
        subjects = discover_pattern(out.parent, f"{relative}/{pattern}")
        source, path, task, labels = (
            "epochs",
            f"{relative}/{pattern}",
            None,
            _epochs_labels(out.parent, f"{relative}/{pattern}", subjects),
        )
    write_text(
        out,
        _starter_text(
            source,
            path,
            task,
            subjects,
            labels,
            name=data.name,
            found=found,
            groups=groups,
            timing=_timing(source, data, out.parent, path, task, subjects),
            covariates=covariates,
        ),
    )


def _timing(source: str, data: Path, folder: Path, path: str, task: str | None, subjects: list[str]) -> dict:
    """Epoch, frequency and baseline settings that fit the first subject's sampling rate and epochs."""
    from famwise.preflight.headers import bids_header, npz_epochs_header
    from famwise.preflight.starter_fit import starter_timing

    if not subjects:
        raise UserError(f"{data}: no subject found")
    if source == "bids":
        header = bids_header(data, subjects[0], task=task, window_ms=(-500.0, 1500.0), wanted=set())
        return starter_timing(header.sample_rate_hz, None)
    header = npz_epochs_header(folder / path.replace("{subject}", subjects[0]), subjects[0])
    last = header.epoch_start_s + (header.n_samples - 1) / header.sample_rate_hz
    return starter_timing(header.sample_rate_hz, (header.epoch_start_s * 1000.0, last * 1000.0))


def _bids_task(recording: Path) -> str | None:
    for part in recording.name.split("_"):
        if part.startswith("task-"):
            return part[5:]
    return None


def _bids_labels(recordings: list[Path]) -> Counter:
    """Event labels (``trial_type``) of the recordings' ``_events.tsv`` files, counted."""
    labels = Counter()
    for recording in recordings:
        events = bids.sidecar(recording, "events.tsv")
        if events.is_file():
            labels.update(row["trial_type"] for row in bids.read_tsv(events) if row.get("trial_type"))
    return labels


def _formats_found(recordings: list[Path]) -> str:
    """E.g. ``"12 vhdr/vmrk/eeg (.vhdr)"``: how many recordings of each format."""
    names = {".edf": "EDF (.edf)", ".bdf": "BDF (.bdf)", ".vhdr": "vhdr/vmrk/eeg (.vhdr)"}
    counts = Counter(names[p.suffix.lower()] for p in recordings)
    return ", ".join(f"{count} {name}" for name, count in sorted(counts.items()))


def _epochs_pattern(data: Path) -> str:
    files = sorted(p.name for p in data.glob("*.npz"))
    if not files:
        raise UserError(f"{data}: found neither a BIDS-EEG folder (sub-*/eeg) nor epochs files (*.npz)")
    stem = files[0]
    if stem.startswith("sub-"):
        return "sub-{subject}.npz"
    raise UserError(f"{data}: epochs files must be named sub-<id>.npz (found {stem})")


def _epochs_labels(folder: Path, pattern: str, subjects: list[str]) -> Counter:
    labels = Counter()
    for subject in subjects:
        with np.load(folder / pattern.replace("{subject}", subject), allow_pickle=False) as archive:
            if "event_labels" in archive.files:
                labels.update(str(c) for c in archive["event_labels"])
    return labels


def participant_columns(data: Path, subjects: list[str]) -> tuple[list[str], list[str]]:
    """Numeric and categorical (2 to 6 levels, some shared) columns of participants.tsv over ``subjects``."""
    from famwise.stats.coding import MISSING, as_number

    rows = bids.read_participants(data)
    numeric, categorical = [], []
    for column in next(iter(rows.values()), {}):
        values = [rows[s][column].strip() for s in subjects if s in rows and column in rows[s]]
        present = [v for v in values if v.lower() not in MISSING]
        levels = set(present)
        if len(levels) < 2:
            continue
        if all(as_number(v) is not None for v in present):
            numeric.append(column)
        elif len(levels) <= 6 and len(levels) < len(present):
            categorical.append(column)
    return numeric, categorical


def _regression_offer(covariates: tuple[list[str], list[str]], condition: str) -> str:
    """A commented regression contrast when participants.tsv has numeric columns (empty otherwise)."""
    numeric, categorical = covariates
    if not numeric:
        return ""
    nuisance = [*numeric[1:], *categorical][:3]
    return f"""  # participants.tsv has numeric columns ({", ".join(numeric)}): uncomment to regress the maps on one,
  # with other columns as nuisance covariates (text columns become indicator columns; Freedman-Lane permutations).
  # Missing values (n/a) are an error: list the subjects to keep in subjects.ids or exclude.
  # - name: {_condition_name(numeric[0])}-effect
  #   test: regression
  #   conditions: [{condition}]
  #   covariate: {numeric[0]}
  #   nuisance: [{", ".join(nuisance)}]
"""


def _condition_name(label: str) -> str:
    """A spec condition name for an event label (letters, digits, '-', '_', '.')."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "-", label).strip("-._") or "condition"


def _starter_text(
    source,
    path,
    task,
    subjects,
    labels: Counter,
    *,
    name: str,
    found: str,
    timing: dict,
    groups: Counter,
    covariates=([], []),
) -> str:
    conditions = (
        "\n".join(
            f"  {_condition_name(label)}: [{json.dumps(label)}]      # {count} epochs over all subjects"
            for label, count in sorted(labels.items())
        )
        or "  condition-a: [label-a]"
    )
    first = (
        [_condition_name(label) for label in sorted(labels)[:2]] if len(labels) >= 2 else ["condition-a", "condition-b"]
    )
    task_line = f"  task: {task}\n" if task else ""
    offered = offered_contrasts([_condition_name(label) for label in sorted(labels)], groups) if labels else ""
    epoch = timing["epoch_ms"] or (-500, 1500)
    baseline = timing["baseline_ms"]
    baseline_text = (
        f"{{mode: db, window_ms: [{baseline[0]:g}, {baseline[1]:g}]}}   # free of edge effects at every frequency"
        if baseline
        else "{mode: none}   # the epochs leave no edge-free time before the event"
    )
    return f"""# famwise study spec, written by `famwise init` from {len(subjects)} subject(s) found.
# Check it with `famwise check <this file>`, run it with `famwise run <this file>`.
# Every key is described in the README's spec reference.
version: 1
name: {name}
output: results          # folder for every result, relative to this file
seed: 1                  # the permutation table comes from this seed

subjects:
  source: {source}{f"            # recordings found: {found}" if found else ""}
  path: {path}
{task_line}  # ids: [...]           # omit to use every subject found: {", ".join(subjects[:10])}{" ..." if len(subjects) > 10 else ""}
  exclude: {{}}           # id: reason
  min_epochs: 10

conditions:              # condition name -> event labels pooled into it
{conditions}

epochs:
  window_ms: [{epoch[0]:g}, {epoch[1]:g}]

decomposition:
  method: morlet
  frequencies: {{lowest_hz: 4, highest_hz: {timing["highest_hz"]:g}, count: 20, spacing: log}}
  cycles: [3, 10]
  time_step_ms: {timing["time_step_ms"]:.10g}
  baseline: {baseline_text}

analysis:                # choose the region before looking at the data
  time_ms: null          # null: from the event (0 ms) to the end of the edge-free data; a window starting
                         # before 0 ms adds baseline points that cannot show an effect but make every correction stricter
  freq_hz: null

channels:
  positions: 10-10
  neighbors: {{method: delaunay}}

contrasts:
  - name: {first[0]}-vs-{first[1]}
    test: paired
    conditions: [{first[0]}, {first[1]}]
{offered}{_regression_offer(covariates, first[0])}
inference:
  alpha: 0.05
  permutations: 1000
  corrections:
    - method: holm
    - method: fdr-bh
    - method: cluster
      forming_p: 0.01
"""
