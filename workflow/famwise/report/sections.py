"""The report's contrast sections: per contrast its heading, figures, corrections and cluster tables.

Each function returns HTML; figures are written as PNG and SVG on the way.
Plain-language summaries describe stored masks and cluster rows only.
"""

import numpy as np

from famwise.axes import is_voltage
from famwise.contrast_words import design_direction, heading_words
from famwise.degenerate import location
from famwise.figure_style import figure_style
from famwise.report import figures
from famwise.report.explorer import explorer_block, explorer_data
from famwise.report.html import anchor, esc, note, table
from famwise.report.methods import correction_parameters, fmt, method_kind
from famwise.report.point_words import cluster_caption, extent_words, grid_words, point_place, side_by_side_words
from famwise.report.results import ReportedContrast, ReportedCorrection, Run, correction_entries
from famwise.report.scalp import project
from famwise.report.study_sections import FigureWriter
from famwise.report.study_words import named
from famwise.report.values import planned_block, values_block
from famwise.report.voltage_figures import time_course_channels

_FWER_P = {"bonferroni", "sidak", "holm", "hochberg"}
_OTHER_CLUSTERS = 10
"""Clusters with p above alpha shown in a table (the largest ones); the TSV has all."""


def alpha_of(study: dict) -> float:
    """The study's alpha (0.05 when the spec has none)."""
    return float((study.get("inference") or {}).get("alpha", 0.05))


def direction(spec: dict, positive: bool) -> str:
    """Plain words for the sign of an effect in a contrast."""
    conditions = [str(c) for c in spec.get("conditions") or []]
    groups = [str(g) for g in spec.get("groups") or []]
    test = spec.get("test", "")
    if test in ("weighted", "between-groups") or (test == "two-sample" and len(conditions) > 1):
        return design_direction(spec, positive)
    if test == "two-sample" and len(groups) == 2:
        first, second = groups
    elif test == "paired" and len(conditions) == 2:
        first, second = conditions
    elif test == "one-sample" and conditions:
        return f"{conditions[0]} {'above' if positive else 'below'} zero"
    elif test in ("correlation", "regression") and spec.get("covariate"):
        kind = "correlation" if test == "correlation" else "association"
        return f"{'positive' if positive else 'negative'} {kind} with {spec['covariate']}"
    elif test == "repeated-measures":
        return "differences among conditions"
    else:
        return "positive" if positive else "negative"
    return f"{first} > {second}" if positive else f"{first} < {second}"


def describe_mask(contrast: ReportedContrast, mask: np.ndarray, spec: dict) -> str:
    """One plain sentence on where a mask's significant points lie."""
    if not mask.any():
        return "No point reached significance."
    channels, freqs, times = np.nonzero(mask)
    per_channel = np.bincount(channels, minlength=len(contrast.channels))
    order = [contrast.channels[i] for i in np.argsort(-per_channel, kind="stable") if per_channel[i]]
    listed = ", ".join(order[:6]) + (f" and {len(order) - 6} more" if len(order) > 6 else "")
    strength = np.where(mask, np.abs(contrast.stat), -np.inf)
    c, f, t = np.unravel_index(np.argmax(strength), mask.shape)
    positive = int(np.count_nonzero(mask & (contrast.stat > 0)))
    negative = int(np.count_nonzero(mask & (contrast.stat < 0)))
    signs = []
    if positive:
        signs.append(f"{positive} with {esc(direction(spec, True))}")
    if negative:
        signs.append(f"{negative} with {esc(direction(spec, False))}")
    return (
        f"Significant points lie {extent_words(contrast, freqs, times)} on {len(order)} "
        f"channel{'s' if len(order) != 1 else ''} ({esc(listed)}); "
        f"{'; '.join(signs)}. Strongest: {figures.stat_label(contrast)} = "
        f"{contrast.stat[c, f, t]:.3g} at {point_place(contrast, c, f, t)}."
    )


def channel_flat(run: Run, contrast: ReportedContrast) -> np.ndarray | None:
    """Projected positions of the contrast's channels, None when some have no position."""
    if run.positions is None:
        return None
    index = {name: i for i, name in enumerate(run.positions.names)}
    if any(c not in index for c in contrast.channels):
        return None
    return project(run.positions.xyz)[[index[c] for c in contrast.channels]]


def permutation_notes(contrast: ReportedContrast, study: dict) -> str:
    """Notes (HTML) on how the permutation count limits the smallest attainable p."""
    info = contrast.nulls
    if not info or info.get("smallest_p") is None:
        return ""
    alpha = alpha_of(study)
    smallest = float(info["smallest_p"])
    rows = fmt(info.get("n_rows"))
    why = (
        f"with n = {contrast.n} participants only {rows} distinct assignments exist"
        if info.get("exact")
        else f"the null has {rows} rows"
    )
    if smallest > alpha:
        return note(
            f"<b>No permutation result can be significant:</b> {why}, so the smallest "
            f"attainable p is {fmt(smallest)}, above α = {fmt(alpha)}.",
            warning=True,
        )
    text = f"The smallest attainable permutation p is {fmt(smallest)} ({why})."
    if smallest > alpha / 10:
        return note(
            text + " Permutation p-values come in steps this coarse, so p near α is "
            "imprecise; " + ("more participants" if info.get("exact") else "more permutations") + " would sharpen it.",
            warning=True,
        )
    return note(text)


def correction_notes(correction: ReportedCorrection, contrast: ReportedContrast, study: dict) -> str:
    """What a correction's result supports, in plain words (HTML), and its warnings."""
    kind = method_kind(correction.method)
    alpha = alpha_of(study)
    if kind in {"bh", "by"}:
        text = (
            "False discovery rate: among the points declared significant, the expected "
            "share of false discoveries is bounded; it does not bound the chance that any "
            "single point is a false positive."
        )
    elif kind == "cluster":
        text = (
            "A cluster's p-value supports a claim about the cluster as a whole (there is an "
            "effect somewhere in it), not about its exact onset, "
            + ("offset" if is_voltage(contrast.freqs) else "frequency edges")
            + " or channel set (Sassenhagen &amp; Draschkow 2019)."
        )
    elif kind == "tfce":
        text = (
            "TFCE p-values are per point and control the chance of any false positive "
            "among all points; the borders of a significant region still depend on power "
            "and are not precise evidence of an effect's onset or extent."
        )
    else:
        text = "Family-wise error: the chance of any false positive among all points is at most α."
    warning = ""
    settings = correction_parameters({}, correction)
    if (
        kind in _FWER_P
        and str(settings.get("pvalues", "")) == "permutation"
        and contrast.nulls.get("smallest_p") is not None
        and float(contrast.nulls["smallest_p"]) > alpha / correction.mask.size
    ):
        warning = note(
            f"With permutation p-values the smallest attainable p "
            f"({fmt(float(contrast.nulls['smallest_p']))}) is above α/m = "
            f"{fmt(alpha / correction.mask.size)}: this procedure cannot declare any "
            "point significant.",
            warning=True,
        )
    return note(text) + warning


def cluster_block(
    contrast: ReportedContrast,
    correction: ReportedCorrection,
    spec: dict,
    study: dict,
    flat: np.ndarray | None,
    write: FigureWriter | None,
) -> str:
    """Cluster table (significant clusters and the largest others) and one figure per
    significant cluster; figures are skipped when ``flat`` (projected positions) is None."""
    alpha = alpha_of(study)
    columns = list(correction.clusters[0].keys())
    titles = {
        k: (v.get("Description", "") + (f" ({v['Units']})" if v.get("Units") else ""))
        if isinstance(v, dict)
        else str(v)
        for k, v in correction.cluster_columns.items()
    }
    significant = [row for row in correction.clusters if float(row["p"]) <= alpha]
    others = [row for row in correction.clusters if float(row["p"]) > alpha]
    shown = significant + others[:_OTHER_CLUSTERS]
    rows = [[row[c] for c in columns] for row in shown]
    classes = ["significant" if float(row["p"]) <= alpha else "" for row in shown]
    ident = anchor(contrast.name, correction.name, "clusters")
    noun = correction.table_noun
    html = (
        f"<h4>{noun.capitalize()}s: {len(significant)} of {len(correction.clusters)} with p ≤ "
        f"{fmt(alpha)} (bold)</h4>"
        + table(columns, rows, titles=titles, row_classes=classes, table_class=f"clusters {ident}")
    )
    if len(others) > _OTHER_CLUSTERS:
        html += (
            f"<p>{len(others) - _OTHER_CLUSTERS} smaller {noun}s with p &gt; {fmt(alpha)} "
            f"are not shown; every {noun} is in contrasts/{esc(contrast.name)}/"
            f"{esc(correction.name)}/clusters.tsv.</p>"
        )
    unit = figures.effect_unit(study)
    for row in correction.clusters:
        if float(row["p"]) > alpha or flat is None:
            continue
        positive = str(row.get("sign", "+")).strip().lower() not in {"-", "negative", "-1"}
        sense = direction(spec, positive)
        words = cluster_caption(contrast, row, noun=noun, sense=sense, stat_label=figures.stat_label(contrast))
        with figure_style():
            fig = figures.cluster_figure(contrast, correction, row, flat, unit=unit)
        number = int(row["id"])
        label = f"{'neg' if number < 0 or not positive else 'pos'}{abs(number)}"
        stem = f"{anchor(contrast.name)}__{anchor(correction.name)}__{noun}-{label}"
        html += write(fig, stem, caption=words, alt=f"{noun} {row['id']} of {correction.name}")
    return html


def left_out_note(contrast: ReportedContrast) -> str:
    """The points left out of the family (degenerate points), listed; empty when there are none."""
    if contrast.left_out is None or not contrast.left_out.any():
        return ""
    count = int(contrast.left_out.sum())
    where = location(contrast.left_out, channels=contrast.channels, freqs=contrast.freqs, times=contrast.times)
    return note(
        f"{count} of {contrast.stat.size} points were left out of the family because the statistic is "
        f"undefined there (a non-finite value, or zero or negligible variance): {esc(where)}. They are not "
        "counted by any correction, never significant, and hatched in the figures."
    )


def contrast_section(run: Run, contrast: ReportedContrast, write: FigureWriter) -> str:
    """Uncorrected map, every correction side by side, nulls, clusters and notes."""
    study = run.study
    spec = next((c for c in study.get("contrasts", []) if c["name"] == contrast.name), {})
    alpha = alpha_of(study)
    total = contrast.stat.size
    head = _contrast_heading(contrast, spec, study)
    uncorrected = contrast.p <= alpha
    base = anchor(contrast.name)
    counts = max([1] + [int(c.mask.sum(axis=0).max()) for c in contrast.corrections])
    course = time_course_channels(study) if is_voltage(contrast.freqs) else None
    cards = []
    with figure_style():
        fig = figures.map_figure(
            contrast,
            uncorrected,
            count_limit=counts,
            title="uncorrected",
            subtitle=f"{int(uncorrected.sum())} of {total} points p ≤ {fmt(alpha)}",
            course=course,
        )
    cards.append(
        write(
            fig,
            f"{base}__uncorrected__map",
            caption=f"<b>uncorrected</b>: {int(uncorrected.sum())} of {total} points "
            f"with p ≤ {fmt(alpha)}. Not a basis for claims.",
            alt="uncorrected map",
        )
    )
    details = []
    for correction in contrast.corrections:
        with figure_style():
            fig = figures.map_figure(
                contrast,
                correction.mask,
                count_limit=counts,
                title=correction.name,
                subtitle=f"{correction.method}: {correction.n_significant} of {total} points",
                course=course,
            )
        cards.append(
            write(
                fig,
                f"{base}__{anchor(correction.name)}__map",
                caption=f"<b>{esc(named(correction.name, correction.method))}</b>: "
                f"{correction.n_significant} significant points",
                alt=f"{correction.name} map",
            )
        )
        details.append(_correction_detail(run, contrast, correction, spec, write))
    grid = (
        f"<h3>Uncorrected and corrected, side by side</h3><p>{side_by_side_words(contrast, course)}</p>"
        f'<div class="grid">{"".join(cards)}</div>'
    )
    explorer = _explorer(run, contrast, spec, alpha, course)
    planned = planned_block(
        run.output_dir / "contrasts" / contrast.name,
        f"{base}__planned__values",
        unit=figures.effect_unit(study),
        write=write,
    )
    return head + grid + explorer + planned + "".join(details)


def _contrast_heading(contrast: ReportedContrast, spec: dict, study: dict) -> str:
    """The contrast's title and one-paragraph summary, with its left-out points and permutation notes."""
    total = contrast.stat.size
    return (
        f'<h2 id="{anchor("contrast", contrast.name)}">Contrast {esc(contrast.name)}</h2>'
        f'<p class="summary">{esc(contrast.test)}'
        + (f", {esc(heading_words(spec))}" if spec.get("conditions") else "")
        + f", {esc(figures.stat_label(contrast))} statistic, {esc(contrast.tail)}, n = "
        f"{contrast.n}; {total} points ({grid_words(contrast)}). {_sign_words(contrast, spec)}.</p>"
        + left_out_note(contrast)
        + permutation_notes(contrast, study)
    )


def _sign_words(contrast: ReportedContrast, spec: dict) -> str:
    """What large values mean: an F is never negative, so it has no sign to explain."""
    if figures.stat_label(contrast) == "F":
        return f"Larger values mean larger {esc(direction(spec, True))}"
    return f"Positive values mean {esc(direction(spec, True))}"


def _explorer(run: Run, contrast: ReportedContrast, spec: dict, alpha: float, course: list[str] | None) -> str:
    """The contrast's interactive explorer (empty without channel positions); ``course`` channels start selected."""
    flat = channel_flat(run, contrast)
    if flat is None:
        return ""
    data = explorer_data(
        contrast,
        run.output_dir / "contrasts" / contrast.name,
        flat=flat,
        alpha=alpha,
        stat_label=figures.stat_label(contrast),
        unit=figures.effect_unit(run.study),
        positive=direction(spec, True),
        negative=direction(spec, False),
        start=course,
    )
    return explorer_block(data)


def _correction_detail(
    run: Run, contrast: ReportedContrast, correction: ReportedCorrection, spec: dict, write: FigureWriter
) -> str:
    study = run.study
    entry = correction_entries(study).get(correction.name, {})
    parameters = correction_parameters(entry, correction, voltage=is_voltage(contrast.freqs))
    listed = ", ".join(f"{k} = {fmt(v) if not isinstance(v, (list, dict)) else v}" for k, v in parameters.items())
    threshold = (
        f"; threshold ({correction.threshold_kind}) {fmt(correction.threshold)}"
        if np.isfinite(correction.threshold)
        else ""
    )
    html = (
        f'<h3 id="{anchor(contrast.name, correction.name)}">{esc(contrast.name)} · '
        f'{esc(correction.name)}</h3><p class="summary">Method {esc(correction.method)}'
        f" ({esc(listed) or 'no parameters'}){esc(threshold)}: "
        f"<b>{correction.n_significant} significant points</b>. "
        f"{describe_mask(contrast, correction.mask, spec)}</p>" + correction_notes(correction, contrast, study)
    )
    if correction.null is not None and np.isfinite(correction.null).any():
        with figure_style():
            fig = figures.null_figure(correction, contrast)
        html += write(
            fig,
            f"{anchor(contrast.name)}__{anchor(correction.name)}__null",
            caption=f"<b>Permutation null</b> of {esc(correction.name)}: the largest "
            "value per permutation, the critical value (dashed) and the "
            "observed largest values. Observed values right of the critical "
            "value are significant.",
            alt=f"null of {correction.name}",
        )
    if correction.clusters:
        flat = channel_flat(run, contrast)
        html += cluster_block(contrast, correction, spec, study, flat, write)
        html += values_block(
            run.output_dir / "contrasts" / contrast.name / correction.name,
            f"{anchor(contrast.name)}__{anchor(correction.name)}__values",
            noun=correction.table_noun,
            unit=figures.effect_unit(study),
            write=write,
            voltage=is_voltage(contrast.freqs),
        )
    return html
