"""A plain-text description of a planned run, for ``famwise check``."""

import warnings

from famwise.bids_notes import left_out_lines, marker_warnings
from famwise.contrast_words import contrast_line
from famwise.plan import Plan
from famwise.regression_words import check_line


def decomposition_line(tf) -> str:
    """The spec's ``decomposition`` in one line; voltage maps (method 'none') name no frequency grid."""
    baseline = f"baseline {tf.baseline.mode}" + (
        f" {list(tf.baseline.window_ms)} ms" if tf.baseline.mode != "none" else ""
    )
    if tf.method == "none":
        return (
            "Decomposition: none, condition mean voltage (µV, points channel x time), "
            + (f"zero-phase low-pass {tf.lowpass_hz:g} Hz, " if tf.lowpass_hz else "no low-pass, ")
            + (
                f"time step {tf.time_step_ms:g} ms by anti-aliasing decimation, "
                if tf.time_step_ms
                else "every sample, "
            )
            + (f"trimmed mean ({tf.trim:g} per end), " if tf.average == "trimmed" else "")
            + baseline
        )
    grid = tf.frequencies
    return (
        f"Decomposition: {tf.method} {tf.measure}, {grid.count} frequencies {grid.lowest_hz:g}-{grid.highest_hz:g} Hz "
        f"({grid.spacing}), {baseline}"
    )


def describe_plan(plan: Plan) -> str:
    """What the spec asks for: subjects, contrasts, resampling, corrections, channel graph."""
    s = plan.study
    i = s.inference
    lines = [f"Study '{s.name}' ({plan.loaded.path.name}) is valid.", ""]
    excluded = s.subjects.exclude
    lines.append(
        f"Subjects: {len(plan.subjects)} analysed ({s.subjects.source} input)"
        + (f", {len(excluded)} excluded:" if excluded else "")
    )
    for subject, reason in excluded.items():
        lines.append(f"  - {subject}: {reason}")
    if plan.groups:
        counts = {}
        for group in plan.groups.values():
            counts[group] = counts.get(group, 0) + 1
        lines.append("Groups: " + ", ".join(f"{g} ({n})" for g, n in sorted(counts.items())))
    if s.subjects.source == "bids":
        lines += left_out_lines(plan.loaded.resolve(s.subjects.path), list(plan.subjects), s.subjects.task)
    lines.append("Conditions: " + "; ".join(f"{name} <- {', '.join(labels)}" for name, labels in s.conditions.items()))
    if s.subjects.source != "maps":
        lines.append(decomposition_line(s.decomposition))
    a = s.analysis
    voltage = s.decomposition.method == "none"
    edge_free = "the epoch's end" if voltage else "the end of the edge-free data"
    lines.append(
        "Analysis region: time "
        + (
            f"{list(a.time_ms)} ms"
            if a.time_ms
            else f"from the event (0 ms) to {edge_free} (the baseline is not tested)"
        )
        + ("" if voltage else ", frequency " + (f"{list(a.freq_hz)} Hz" if a.freq_hz else "all"))
        + ", channels "
        + (", ".join(a.channels) if a.channels else "all")
    )
    note = window_note(a.time_ms)
    if note:
        lines.append(note)
    lines.append("Contrasts:")
    lines += [f"  - {line}" for line in contrast_lines(plan)]
    lines.append(
        f"Inference: {_statistic_words(plan)}, alpha {i.alpha:g}, family {i.family}, "
        f"degenerate points: {i.degenerate_points}"
        + (f"; {i.permutations} permutations in {i.shards} shard(s), seed {s.seed}" if i.needs_null else "")
    )
    lines.append("Corrections:")
    for c in i.corrections:
        settings = c.model_dump(exclude={"name", "method"}, exclude_none=True)
        if voltage and "dims" in settings:  # voltage maps have no frequency axis to connect over
            settings["dims"] = [d for d in settings["dims"] if d != "freq"]
        lines.append(
            f"  - {c.label}: {c.method}"
            + (f" ({', '.join(f'{k}={v}' for k, v in settings.items())})" if settings else "")
        )
    if plan.needs_graph:
        lines.append("")
        lines.append(_graph_summary(plan))
    return "\n".join(lines)


def contrast_lines(plan: Plan) -> list[str]:
    """Each contrast in words, with its subjects and its permutation count (exact or Monte Carlo)."""
    from famwise.preflight.spec_checks import permutation_table  # numpy-heavy: only for check

    lines = []
    for contrast in plan.study.contrasts:
        settings = plan.contrast_settings(contrast.name)
        sizes = None
        if settings.groups is not None:
            sizes = [settings.groups.count(g) for g in range(len(contrast.groups))]
        table = permutation_table(plan, contrast) if plan.study.inference.needs_null else None
        if contrast.test == "regression":
            lines.append(f"{contrast.name}: {check_line(plan, contrast)}")
            continue
        lines.append(contrast_line(contrast, n_subjects=len(settings.subjects), table=table, group_sizes=sizes))
    return lines


def window_note(time_ms) -> str | None:
    """A one-line note when the analysis window starts before the event (None otherwise)."""
    if time_ms is None or time_ms[0] >= 0:
        return None
    return (
        f"Note: analysis.time_ms starts at {time_ms[0]:g} ms, before the event: after baseline normalisation "
        "those points cannot show an effect, but they count in every family-wise correction and make it stricter."
    )


def input_warnings(plan: Plan) -> list[str]:
    """Warnings about the subjects' input files (BIDS: marker counts that disagree with _events.tsv)."""
    s = plan.study.subjects
    if s.source != "bids":
        return []
    return marker_warnings(plan.loaded.resolve(s.path), list(plan.subjects), s.task)


def _graph_summary(plan: Plan) -> str:
    """The neighbor graph of the first subject's channels, when it can be built before decomposition."""
    from famwise.electrodes import channel_graph, graph_summary

    channels = plan.first_subject_channels()
    if channels is None:
        return "Channel graph: built from the first subject's channels when the run starts."
    s = plan.study.channels
    if plan.study.analysis.channels:
        channels = list(plan.study.analysis.channels)
    if s.positions == "bids":
        return "Channel graph: from each subject's _electrodes.tsv when the run starts."
    positions = s.positions if s.positions in ("10-10", "10-20") else plan.loaded.resolve(s.positions)
    n = s.neighbors
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        graph, _ = channel_graph(
            channels,
            positions=positions,
            method=n.method,
            max_distance_mm=n.max_distance_mm,
            edges_file=plan.loaded.resolve(n.edges_file) if n.edges_file else None,
        )
    text = "Channel graph:\n" + "\n".join("  " + line for line in graph_summary(graph).splitlines())
    for warning in caught:
        text += f"\n  warning: {warning.message}"
    return text


def _statistic_words(plan: Plan) -> str:
    """E.g. "t statistic, two-sided"; F contrasts (always their upper tail) are named apart."""
    from famwise.stats import F_TESTS

    i = plan.study.inference
    f_contrasts = [c.name for c in plan.study.contrasts if c.test in F_TESTS]
    if len(f_contrasts) == len(plan.study.contrasts):
        return "F statistic, upper tail"
    words = f"{i.statistic} statistic, {i.tail}"
    return words + (f" (F, upper tail: {', '.join(f_contrasts)})" if f_contrasts else "")
