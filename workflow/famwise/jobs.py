"""One entry per Snakemake rule: ``python -m famwise.jobs <stage> ...``.

A dispatcher: each entry parses the rule's settings (JSON text from its params)
back into the stage's settings type (``famwise.settings``), calls the stage,
and writes the outputs atomically. A user error ends the job with one line
``famwise: error: ...`` on stderr (the job's log) and exit status 2.
"""

import argparse
import json
import os
import sys
import time
from pathlib import Path

# Every rule runs single-threaded (Snakemake runs jobs side by side); a multi-threaded
# BLAS in each of them would only fight for the same cores. Set before numpy loads,
# and only when run as a job: importing this module must not change the importer's threads.
if __name__ == "__main__":
    for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS"):
        os.environ.setdefault(_variable, "1")

import numpy as np  # noqa: E402

from famwise import settings as types  # noqa: E402
from famwise.atomic import save_npz, write_json, write_text  # noqa: E402
from famwise.errors import UserError  # noqa: E402
from famwise.settings_codec import from_json  # noqa: E402

# Each stage imports what it needs inside its function: a job is a fresh process,
# and the numba and scipy.stats imports of other stages would cost it seconds.


def _say(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", file=sys.stderr, flush=True)


def run_decompose(args, settings: types.DecomposeSettings) -> None:
    """Subject input -> ``tf/sub-<id>.npz`` and ``tf/sub-<id>.json`` (with the warnings raised on the way)."""
    import warnings

    from famwise.errors import FamwiseWarning

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FamwiseWarning)
        maps, info = _decompose_subject(args, settings)
    info["warnings"] = list(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, FamwiseWarning)))
    for message in info["warnings"]:
        print(f"famwise: warning: {message}", file=sys.stderr, flush=True)
    out = Path(args.out)
    maps.save(out)
    write_json(out.with_suffix(".json"), info)
    _say(f"subject {args.subject}: wrote {out}")


def _decompose_subject(args, settings: types.DecomposeSettings):
    """The subject's maps and sidecar record."""
    from famwise import bids
    from famwise.decomposition import load_maps
    from famwise.io import load_epochs, subject_file

    subject = args.subject
    source = settings.source
    labels = {label: name for name, group in settings.conditions.items() for label in group}
    rejected, sample_rate_hz = {}, None
    if source == "maps":
        maps = load_maps(subject_file(Path("."), settings.path, subject))
    else:
        if source == "epochs":
            epochs = load_epochs(subject_file(Path("."), settings.path, subject), subject=subject)
        else:
            ep = settings.epochs
            epochs = bids.read_subject(
                Path(settings.path),
                subject,
                task=settings.task,
                window_ms=ep.window_ms,
                reject_peak_to_peak_uv=ep.reject_peak_to_peak_uv,
                reference=ep.reference,
                labels=set(labels),
            )
        sample_rate_hz = epochs.sample_rate_hz
        for label, count in epochs.rejected.items():
            if label in labels:
                rejected[labels[label]] = rejected.get(labels[label], 0) + int(count)
        tf = settings.decomposition
        _say(
            f"subject {subject}: {epochs.data.shape[0]} epochs x {epochs.data.shape[1]} channels, {tf.method} {tf.measure}"
        )
        maps = _subject_maps(epochs, subject, settings)
    missing = [c for c in settings.conditions if c not in maps.conditions]
    if missing:
        raise UserError(
            f"subject {subject}: no maps for condition(s) {', '.join(missing)} (found: {', '.join(maps.conditions)})"
        )
    info = {
        "subject": subject,
        "sample_rate_hz": sample_rate_hz,
        "n_epochs": {c: int(n) for c, n in zip(maps.conditions, maps.n_epochs)},
        "rejected": {c: rejected.get(c, 0) for c in maps.conditions},
    }
    return maps, info


def _subject_maps(epochs, subject: str, settings: types.DecomposeSettings):
    """One subject's epochs -> its maps: voltage maps (method 'none') or the time-frequency decomposition."""
    from famwise.decomposition import decompose, frequency_grid, voltage_maps

    tf, baseline = settings.decomposition, settings.decomposition.baseline
    conditions = {name: list(group) for name, group in settings.conditions.items()}
    if tf.method == "none":
        return voltage_maps(
            epochs,
            subject=subject,
            conditions=conditions,
            time_step_ms=tf.time_step_ms,
            lowpass_hz=tf.lowpass_hz,
            average=tf.average,
            trim=tf.trim,
            baseline_mode=baseline.mode,
            baseline_window_ms=baseline.window_ms,
            baseline_pooled=baseline.pooled,
            min_epochs=settings.min_epochs,
        )
    grid = tf.frequencies
    return decompose(
        epochs,
        subject=subject,
        conditions=conditions,
        frequencies_hz=frequency_grid(grid.lowest_hz, grid.highest_hz, grid.count, grid.spacing),
        method=tf.method,
        cycles=tf.cycles,
        fwhm_ms=tf.fwhm_ms,
        taper_length_ms=tf.taper_length_ms,
        nw=tf.nw,
        measure=tf.measure,
        time_step_ms=tf.time_step_ms,
        average=tf.average,
        trim=tf.trim,
        baseline_mode=baseline.mode,
        baseline_window_ms=baseline.window_ms,
        baseline_pooled=baseline.pooled,
        baseline_single_epoch=baseline.single_epoch,
        min_epochs=settings.min_epochs,
        progress=_say,
    )


def run_subjects_table(args, settings: types.SubjectsTableSettings) -> None:
    """Per-subject JSON sidecars -> ``subjects.tsv`` (included and excluded subjects)."""
    info = {}
    for path in args.inputs:
        record = json.loads(Path(path).read_text())
        info[record["subject"]] = record
    conditions = settings.conditions
    header = (
        ["subject", "status", "reason", "group"]
        + [f"n_{c}" for c in conditions]
        + [f"rejected_{c}" for c in conditions]
    )
    lines = ["\t".join(header)]
    for subject in settings.found:
        reason = settings.exclude.get(subject, "")
        record = info.get(subject)
        counts = [str(record["n_epochs"].get(c, 0)) if record else "n/a" for c in conditions]
        rejected = [str(record["rejected"].get(c, 0)) if record else "n/a" for c in conditions]
        status = "excluded" if reason else "included"
        lines.append(
            "\t".join(
                [subject, status, reason.replace("\t", " "), settings.groups.get(subject, "n/a"), *counts, *rejected]
            )
        )
    write_text(Path(args.out), "\n".join(lines) + "\n")


def run_channel_graph(args, settings: types.GraphSettings) -> None:
    """Channel names of the data + positions -> ``channels/graph.npz``."""
    from famwise import bids, electrodes
    from famwise.decomposition import load_maps

    channels = list(load_maps(Path(args.maps)).channels)
    wanted = settings.analysis_channels
    if wanted:
        lookup = {c.lower(): c for c in channels}
        channels = [lookup.get(name.lower(), name) for name in wanted]
    source = settings.positions
    if source == "bids":
        subject = Path(args.maps).stem.removeprefix("sub-")
        source = bids.electrodes_file(Path(settings.bids_root), subject, task=settings.task)
        if source is None:
            raise UserError(f"channels.positions: 'bids' but subject {subject} has no _electrodes.tsv")
    neighbors = settings.neighbors
    graph, positions = electrodes.channel_graph(
        channels,
        positions=source,
        method=neighbors.method,
        max_distance_mm=neighbors.max_distance_mm,
        edges_file=Path(neighbors.edges_file) if neighbors.edges_file else None,
    )
    _say(electrodes.graph_summary(graph))
    electrodes.save_graph(Path(args.out), graph, positions)


def run_contrast_data(args, settings: types.ContrastSettings) -> None:
    """Subjects' maps -> ``contrasts/<c>/subjects.npz``."""
    from famwise.design import build_contrast

    files = [Path(p) for p in args.inputs]
    rates = [json.loads(f.with_suffix(".json").read_text()).get("sample_rate_hz") for f in files]
    data = build_contrast(files, sampling_rates=rates, settings=settings)
    _say(f"contrast {settings.name}: {len(data.subjects)} subjects x {np.prod(data.shape)} points {data.shape}")
    data.save(Path(args.out))


def run_observed(args, settings: types.ObservedSettings) -> None:
    """Contrast data -> ``contrasts/<c>/observed.npz`` (with the derived forming thresholds)."""
    from famwise.design import load_contrast
    from famwise.observed import observed_arrays, save_observed

    data = load_contrast(Path(args.subjects))
    try:
        arrays = observed_arrays(data, data.x, settings)
    except UserError as error:  # degenerate points: name the contrast
        raise UserError(f"contrast {Path(args.out).parent.name}: {error}") from None
    save_observed(Path(args.out), arrays)


def run_null_shard(args, settings: types.NullSettings) -> None:
    """Contrast data + observed -> ``contrasts/<c>/nulls/shard-<k>.npz``."""
    from famwise.nulls.shard import null_shard

    arrays = null_shard(
        Path(args.subjects),
        Path(args.observed),
        Path(args.graph) if args.graph.strip() else None,
        shard=args.shard,
        settings=settings,
        progress=_say,
    )
    save_npz(Path(args.out), **arrays)


def run_family_stepdown_shard(args, settings: types.NullSettings) -> None:
    """Every contrast's data + observed -> ``family/<correction>/shard-<k>.npz`` (joint step-down)."""
    from famwise.nulls.shard import family_stepdown_shard

    arrays = family_stepdown_shard(
        [Path(p) for p in args.subjects.split()],
        [Path(p) for p in args.observed.split()],
        shard=args.shard,
        settings=settings,
        key=args.key,
        progress=_say,
    )
    save_npz(Path(args.out), **arrays)


def run_null_info(args, settings: types.NullSettings) -> None:
    """Contrast data -> ``contrasts/<c>/nulls/info.json`` (table size and kind, smallest attainable p)."""
    from famwise.nulls.shard import permutation_info

    write_json(Path(args.out), permutation_info(Path(args.subjects), settings=settings))


def run_correct(args, settings: types.CorrectionSettings) -> None:
    """Observed (+ null shards) -> ``contrasts/<c>/<correction>/result.npz`` (+ clusters.tsv)."""
    from famwise.axes import is_voltage
    from famwise.correct.apply import apply_correction, save_result

    inputs = [Path(p) for p in args.inputs]
    result, shape = apply_correction(inputs, contrast=args.contrast, settings=settings)
    observed = next(p for p in inputs if p.name == "observed.npz" and p.parent.name == args.contrast)
    with np.load(observed, allow_pickle=False) as archive:
        voltage = is_voltage(archive["freqs"])
    save_result(Path(args.out), result, shape=shape, settings=settings, voltage=voltage)
    _say(f"{settings.correction.label}: {result.n_significant} significant points")


def run_subject_values(args, settings: types.SubjectValuesSettings) -> None:
    """Contrast data + a correction's result -> ``subject_values.tsv`` (+ .json): each subject's mean per cluster."""
    from famwise.subject_values import run

    run(settings, Path(args.subjects), Path(args.result), [Path(p) for p in args.inputs], Path(args.out))


def run_planned_values(args, settings: types.SubjectValuesSettings) -> None:
    """Contrast data -> ``planned_values.tsv`` (+ .json): each subject's mean per planned region."""
    from famwise.planned_values import run_planned

    run_planned(settings, Path(args.subjects), [Path(p) for p in args.inputs], Path(args.out))


def run_study_record(args, settings: types.StudyRecordSettings) -> None:
    """The validated spec -> ``study.json`` (read by the report)."""
    write_json(Path(args.out), settings.study)


def run_report(args, settings: types.ReportSettings) -> None:
    """Every result -> ``report/`` (index.html, figures, methods.md, provenance.json)."""
    from famwise.report import build_report

    spec_path = Path(settings.spec)
    build_report(
        Path("."),
        spec_text=spec_path.read_text(encoding="utf-8"),
        spec_path=spec_path,
        input_files={name: Path(f) for name, f in settings.input_files.items()},
    )


def run_calibrate_shard(args, settings: types.CalibrationSettings) -> None:
    """Contrast data -> ``calibration/<c>/shard-<k>.npz`` (null datasets through every correction)."""
    from famwise.calibrate.datasets import calibration_shard

    graph = Path(args.graph) if args.graph.strip() else None
    save_npz(
        Path(args.out),
        **calibration_shard(Path(args.subjects), graph, shard=args.shard, settings=settings, progress=_say),
    )


def run_calibrate_table(args, settings: types.CalibrationSettings) -> None:
    """Shards -> ``calibration/<c>.tsv`` (+ .json, .png, .svg)."""
    from famwise.calibrate.table import summarize

    rows = summarize(
        [Path(p) for p in args.inputs],
        Path(args.out),
        settings=settings,
        subjects=Path(args.subjects),
        observed=Path(args.observed),
    )
    for row in rows:
        _say(
            f"{settings.contrast}: {row.correction}: FWER {row.fwer:.3f} "
            f"[{row.fwer_ci_low:.3f}, {row.fwer_ci_high:.3f}] (nominal {row.nominal:g})"
        )


def run_power_shard(args, settings: types.PowerShardSettings) -> None:
    """The pilot's contrast data -> ``power/<c>/<effect>/n<N>/shard-<k>.npz`` (simulated studies through every correction)."""
    from famwise.power.shard import power_shard

    graph = Path(args.graph) if args.graph.strip() else None
    save_npz(
        Path(args.out),
        **power_shard(Path(args.subjects), graph, shard=args.shard, settings=settings, progress=_say),
    )


def run_power_table(args, settings: types.PowerTableSettings) -> None:
    """Shards -> ``power/<c>.tsv`` (+ .json, .png, .svg, and .md: the paragraph for a proposal)."""
    from famwise.design import load_contrast
    from famwise.power.curves import power_figure
    from famwise.power.table import read_table, summarize
    from famwise.power.text import format_rows, methods_sentences

    out = Path(args.out)
    summarize([Path(p) for p in args.inputs], out, settings=settings, subjects=Path(args.subjects))
    rows = read_table(out)
    info = json.loads(out.with_suffix(".json").read_text(encoding="utf-8"))["Power"]
    power_figure(rows, contrast=settings.contrast, target=settings.target, folder=out.parent, stem=out.stem)
    pilot_n = len(load_contrast(Path(args.subjects)).subjects)
    write_text(out.with_suffix(".md"), methods_sentences(rows, info, pilot_n=pilot_n) + "\n")
    _say(f"{settings.contrast}:\n{format_rows(rows, info)}")


STAGES = {
    "decompose": (run_decompose, types.DecomposeSettings),
    "subjects-table": (run_subjects_table, types.SubjectsTableSettings),
    "channel-graph": (run_channel_graph, types.GraphSettings),
    "contrast-data": (run_contrast_data, types.ContrastSettings),
    "observed": (run_observed, types.ObservedSettings),
    "null-shard": (run_null_shard, types.NullSettings),
    "null-info": (run_null_info, types.NullSettings),
    "family-stepdown-shard": (run_family_stepdown_shard, types.NullSettings),
    "correct": (run_correct, types.CorrectionSettings),
    "subject-values": (run_subject_values, types.SubjectValuesSettings),
    "planned-values": (run_planned_values, types.SubjectValuesSettings),
    "study-record": (run_study_record, types.StudyRecordSettings),
    "report": (run_report, types.ReportSettings),
    "calibrate-shard": (run_calibrate_shard, types.CalibrationSettings),
    "calibrate-table": (run_calibrate_table, types.CalibrationSettings),
    "power-shard": (run_power_shard, types.PowerShardSettings),
    "power-table": (run_power_table, types.PowerTableSettings),
}
"""Stage name -> (entry, settings type)."""


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="python -m famwise.jobs", description=__doc__)
    parser.add_argument("stage", choices=sorted(STAGES))
    parser.add_argument("--settings", required=True, help="the stage's settings as JSON")
    parser.add_argument("--out", help="output file")
    parser.add_argument("--subject")
    parser.add_argument("--contrast")
    parser.add_argument("--maps")
    parser.add_argument("--subjects")
    parser.add_argument("--observed")
    parser.add_argument("--result", help="a correction's result.npz (subject values)")
    parser.add_argument("--graph", default="")
    parser.add_argument("--shard", type=int)
    parser.add_argument("--key", help="correction name (joint step-down shards)")
    parser.add_argument("inputs", nargs="*")
    return parser


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_intermixed_args(argv)
    entry, settings_type = STAGES[args.stage]
    try:
        entry(args, from_json(settings_type, args.settings))
    except UserError as error:
        print(f"famwise: error: {error}", file=sys.stderr, flush=True)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
