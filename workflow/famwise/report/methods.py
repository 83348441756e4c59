"""The methods paragraph: what was done, with every setting, from the spec and the run."""

import re
from dataclasses import replace
from pathlib import Path

import numpy as np

from famwise import stage_warnings
from famwise.report.design_methods import DESIGN_REFERENCES, design_reference_keys, design_sentence, is_design
from famwise.report.provenance import package_versions
from famwise.report.regression_methods import REFERENCES as REGRESSION_REFERENCES
from famwise.report.regression_methods import regression_resampling, regression_sentence
from famwise.report.results import ReportedContrast, ReportedCorrection, Run, correction_entries, read_run
from famwise.report.voltage_methods import is_voltage_study, voltage_default_window, voltage_paragraph

REFERENCES = {
    "bonferroni": "Dunn OJ (1961). Multiple comparisons among means. J Am Stat Assoc 56(293):52-64.",
    "sidak": "Šidák Z (1967). Rectangular confidence regions for the means of multivariate normal "
    "distributions. J Am Stat Assoc 62(318):626-633.",
    "holm": "Holm S (1979). A simple sequentially rejective multiple test procedure. Scand J Stat 6(2):65-70.",
    "hochberg": "Hochberg Y (1988). A sharper Bonferroni procedure for multiple tests of "
    "significance. Biometrika 75(4):800-802.",
    "bh": "Benjamini Y, Hochberg Y (1995). Controlling the false discovery rate: a practical and "
    "powerful approach to multiple testing. J R Stat Soc B 57(1):289-300.",
    "by": "Benjamini Y, Yekutieli D (2001). The control of the false discovery rate in multiple "
    "testing under dependency. Ann Stat 29(4):1165-1188.",
    "maxstat": "Westfall PH, Young SS (1993). Resampling-Based Multiple Testing. Wiley, New York.",
    "cluster": "Maris E, Oostenveld R (2007). Nonparametric statistical testing of EEG- and "
    "MEG-data. J Neurosci Methods 164(1):177-190.",
    "tfce": "Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing problems "
    "of smoothing, threshold dependence and localisation in cluster inference. "
    "NeuroImage 44(1):83-98.",
    "yuen": "Yuen KK (1974). The two-sample trimmed t for unequal population variances. Biometrika 61(1):165-170.",
    "phipson": "Phipson B, Smyth GK (2010). Permutation p-values should never be zero: calculating "
    "exact p-values when permutations are randomly drawn. Stat Appl Genet Mol Biol "
    "9(1):Article 39.",
    **REGRESSION_REFERENCES,
    "edges": "Torrence C, Compo GP (1998). A practical guide to wavelet analysis. Bull Am Meteorol Soc 79(1):61-78.",
    "multitaper": "Thomson DJ (1982). Spectrum estimation and harmonic analysis. Proc IEEE 70(9):1055-1096.",
    "nw": "Percival DB, Walden AT (1993). Spectral Analysis for Physical Applications. Cambridge University Press.",
    "clusterwarn": "Sassenhagen J, Draschkow D (2019). Cluster-based permutation tests of MEG/EEG "
    "data do not establish significance of effect latency or location. "
    "Psychophysiology 56(6):e13335.",
}
REFERENCES |= DESIGN_REFERENCES
"""Full references, by the key of the method that cites them."""

_DESCRIPTIONS = {
    "bonferroni": "Bonferroni correction (Dunn 1961)",
    "sidak": "Šidák correction (Šidák 1967)",
    "holm": "Holm's step-down procedure (Holm 1979)",
    "hochberg": "Hochberg's step-up procedure (Hochberg 1988)",
    "bh": "Benjamini-Hochberg false discovery rate procedure (Benjamini & Hochberg 1995)",
    "by": "Benjamini-Yekutieli false discovery rate procedure for arbitrary dependence (Benjamini & Yekutieli 2001)",
    "maxstat": "maximum-statistic permutation correction (Westfall & Young 1993)",
    "cluster": "cluster-based permutation inference (Maris & Oostenveld 2007)",
    "tfce": "threshold-free cluster enhancement with permutation inference (Smith & Nichols 2009)",
}


def method_kind(method: str) -> str:
    """Family of a correction method name: a key of :data:`REFERENCES` or ``"other"``."""
    name = str(method).lower().replace("_", "-").replace(" ", "-")
    if "tfce" in name:
        return "tfce"
    if "cluster" in name:
        return "cluster"
    if "max" in name or "westfall" in name:
        return "maxstat"
    if "yekutieli" in name or name in {"by", "fdr-by"}:
        return "by"
    if "benjamini" in name or name in {"bh", "fdr", "fdr-bh"}:
        return "bh"
    for kind in ("bonferroni", "sidak", "holm", "hochberg"):
        if kind in name.replace("š", "s"):
            return kind
    return "other"


_NEIGHBORS = {
    "delaunay": "Delaunay triangulation of the projected positions",
    "distance": "channels within a distance",
    "edges": "an edge list given by the user",
}
_MEASURES = {
    "power": "Power",
    "induced": "Induced power (each condition's average response removed from its epochs first)",
    "itpc": "Inter-trial phase coherence",
}
_MODES = {
    "db": "decibel change (10 log10 of the ratio)",
    "percent": "percent change",
    "zscore": "z-scores",
    "ratio": "the ratio",
}


def fmt(value) -> str:
    """A number as the report prints it (integers exact, others to 4 significant digits)."""
    if isinstance(value, bool) or value is None:
        return str(value)
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return str(int(value)) if float(value).is_integer() and abs(value) < 1e15 else f"{value:.4g}"
    return str(value)


def _span(values, unit: str, *, whole: str = "the whole range") -> str:
    if not values:
        return whole
    return f"{fmt(values[0])} to {fmt(values[1])} {unit}"


def _range(value) -> str:
    if isinstance(value, (list, tuple)):
        return f"{fmt(value[0])} to {fmt(value[-1])} (lowest to highest frequency)"
    return fmt(value)


def correction_parameters(spec_entry: dict, correction: ReportedCorrection | None, *, voltage: bool = False) -> dict:
    """Every parameter of a correction: the spec's entry, then what the run resolved.

    Parameters
    ----------
    spec_entry : dict
        The correction's entry in the spec.
    correction : ReportedCorrection or None
        The stored result; its settings add the method's own run settings
        (``result``), e.g. the cluster-forming threshold in statistic units.
    voltage : bool
        The contrast's maps are voltage maps: ``dims`` leaves out ``freq`` (their single frequency entry).
    """
    settings = correction.settings if correction is not None else {}
    parameters = dict(settings.get("correction") or {})
    parameters.update(spec_entry)
    parameters = {k: v for k, v in parameters.items() if k not in {"name", "method", "label"} and v is not None}
    for key, value in (settings.get("result") or {}).items():
        if key == "threshold" and method_kind(correction.method) == "cluster":
            key = "forming threshold (statistic)"
        parameters.setdefault(key, value)
    if voltage and isinstance(parameters.get("dims"), list):
        parameters["dims"] = [d for d in parameters["dims"] if d != "freq"]
    return parameters


def _parameter_text(parameters: dict) -> str:
    return (
        "; ".join(f"{k} = {fmt(v) if not isinstance(v, (list, dict)) else v}" for k, v in parameters.items())
        or "no parameters"
    )


def _subjects(run: Run, study: dict) -> str:
    included = [r for r in run.subjects if r.get("status", "included") == "included"]
    excluded = [r for r in run.subjects if r.get("status") == "excluded"]
    text = f"Data of {len(included)} participants entered the analysis"
    if excluded:
        listed = "; ".join(f"{r['subject']}: {r.get('reason') or 'no reason given'}" for r in excluded)
        text += f"; {len(excluded)} {'was' if len(excluded) == 1 else 'were'} excluded ({listed})"
    text += "."
    if (study.get("subjects") or {}).get("min_epochs"):
        text += (
            f" A participant needed at least {fmt(study['subjects']['min_epochs'])} epochs "
            "per condition after rejection."
        )
    epochs = study.get("epochs") or {}
    if epochs.get("window_ms") and (study.get("subjects") or {}).get("source") == "bids":
        text += f" Epochs ran from {_span(epochs['window_ms'], 'ms')} around each event"
        if epochs.get("reject_peak_to_peak_uv") is not None:
            text += (
                f"; epochs with a peak-to-peak amplitude above {fmt(epochs['reject_peak_to_peak_uv'])} µV were rejected"
            )
        if epochs.get("reference") == "average":
            text += "; data were re-referenced to the average of all EEG channels"
        elif epochs.get("reference"):
            text += "; the recorded reference was kept"
        text += "."
    for condition in study.get("conditions", {}):
        counts = [float(r[f"n_{condition}"]) for r in included if r.get(f"n_{condition}", "") != ""]
        if counts:
            text += (
                f" Epochs kept for condition {condition}: mean {fmt(float(np.mean(counts)))}, "
                f"range {fmt(int(min(counts)))} to {fmt(int(max(counts)))} per participant."
            )
    return text


def _decomposition(study: dict) -> str:
    tf = study.get("decomposition") or {}
    if is_voltage_study(study):
        return voltage_paragraph(tf, fmt)
    freqs = tf.get("frequencies") or {}
    method = str(tf.get("method", "morlet")).lower()
    grid = (
        f"at {fmt(freqs.get('count'))} frequencies from "
        f"{fmt(freqs.get('lowest_hz', freqs.get('start')))} to "
        f"{fmt(freqs.get('highest_hz', freqs.get('stop')))} Hz ({freqs.get('spacing', 'log')} spacing)"
    )
    measure = _MEASURES.get(str(tf.get("measure", "power")), str(tf.get("measure")))
    if method == "multitaper":
        text = (
            f"{measure} was estimated with multitaper analysis using discrete "
            f"prolate spheroidal (DPSS) tapers (Thomson 1982) {grid}"
        )
        if tf.get("taper_length_ms") is not None:
            text += f", with tapers {fmt(tf['taper_length_ms'])} ms long"
        if tf.get("nw") is not None:
            text += (
                f" and a time-half-bandwidth product NW of {fmt(tf['nw'])} "
                f"({fmt(2 * float(tf['nw']) - 1)} tapers; Percival & Walden 1993)"
            )
    else:
        text = f"{measure} was estimated by convolution with complex Morlet wavelets {grid}"
        if tf.get("fwhm_ms") is not None:
            text += f", with a full width at half maximum of {_range(tf['fwhm_ms'])} ms in time"
        elif tf.get("cycles") is not None:
            text += f", with {_range(tf['cycles'])} cycles"
    if tf.get("time_step_ms") is not None:
        text += f"; values were kept every {fmt(tf['time_step_ms'])} ms"
    kernel = "window" if method == "multitaper" else "wavelet"
    text += (
        f". Points whose {kernel} reached beyond the epoch (the cone of influence; Torrence & Compo "
        "1998) were left out of the analysis."
    )
    if tf.get("average") == "trimmed":
        text += f" Epochs were averaged with a trimmed mean (trim {fmt(tf.get('trim'))} per end)."
    baseline = tf.get("baseline") or {}
    mode = baseline.get("mode")
    if mode and str(mode).lower() != "none":
        text += (
            f" Values were expressed as {_MODES.get(str(mode), str(mode))} relative to the baseline from "
            f"{_span(baseline.get('window_ms'), 'ms')}"
        )
        text += ", pooled over conditions" if baseline.get("pooled") else ", per condition"
        text += ", on single epochs." if baseline.get("single_epoch") else ", after averaging epochs."
    else:
        text += " No baseline normalisation was applied."
    return text


def _baseline_caveat(run: Run) -> str:
    """A sentence for each baseline window that reached into the edge zone (from the jobs' warnings)."""
    sentences = []
    for line in run.warnings:
        if line.startswith("baseline window"):
            message = stage_warnings.message_of(line)
            who = line[len(message) :].strip(" ()")
            message = re.sub(r"\[([^\]]*)\] Hz", lambda m: _hz_list(m.group(1)), message)
            sentences.append(
                f" Caveat: in {who}, the {message.replace(' reaches ', ' reached ')}, so the baseline "
                "there includes edge-affected values."
            )
    return "".join(sentences)


def _time_window(time_ms, run: Run) -> str:
    """The analysis time window in words, with why it starts where it does."""
    if time_ms:
        before = " (chosen to include time before the event)" if time_ms[0] < 0 else ""
        return f"{_span(time_ms, 'ms')}{before}"
    end = f" to {fmt(float(run.contrasts[0].times[-1]) * 1e3)} ms" if run.contrasts else ""
    if is_voltage_study(run.study):
        return voltage_default_window(end)
    return (
        f"the window from the event (0 ms){end}, where the data free of edge effects end (the pre-event "
        "baseline was not tested: after baseline normalisation it cannot show an effect and would only make "
        "every family-wise correction stricter)"
    )


def _left_out_sentence(run: Run) -> str:
    """One sentence on the points left out of the family (degenerate points), if any."""
    counts = [(c.name, int(c.left_out.sum())) for c in run.contrasts if c.left_out is not None and c.left_out.any()]
    if not counts:
        return ""
    listed = ", ".join(f"{n} in {name}" for name, n in counts)
    return (
        f" Points where the statistic was undefined (a non-finite value, or a variance across subjects that was "
        f"zero or below (1e-6 times the map's largest absolute value)^2) were left out of the family ({listed}): "
        "they were not counted among the tests, could not be significant and did not join clusters."
    )


def _window(study: dict, run: Run) -> str:
    analysis = study.get("analysis") or {}
    channels = analysis.get("channels")
    voltage = is_voltage_study(study)
    band = "" if voltage else f" and {_span(analysis.get('freq_hz'), 'Hz', whole='all frequencies')}"
    text = (
        f"Statistics were computed at every channel{'' if voltage else ', frequency'} and time point within "
        f"{_time_window(analysis.get('time_ms'), run)}{band}"
        f" ({'all channels' if not channels else ', '.join(map(str, channels))})."
    )
    if run.contrasts:
        shape = run.contrasts[0].stat.shape
        frequencies = "" if voltage else f"{shape[1]} frequencies × "
        text += (
            f" Each contrast thus comprised {shape[0]} channels × {frequencies}"
            f"{shape[2]} time points = {int(np.prod(shape))} tests."
        )
        text += _left_out_sentence(run)
    neighbors = (study.get("channels") or {}).get("neighbors") or {}
    if run.graph is not None:
        method = neighbors.get("method", run.graph.method)
        text += (
            f" Channel neighbors ({_NEIGHBORS.get(method, method)}"
            + (
                f", maximum distance {fmt(neighbors['max_distance_mm'])} mm"
                if neighbors.get("max_distance_mm") is not None
                else ""
            )
            + f") formed {run.graph.n_edges} neighbor pairs among {len(run.graph.channels)} channels."
        )
    return text


def _contrast(contrast: ReportedContrast, spec: dict, study: dict) -> str:
    if contrast.test == "regression":
        return regression_sentence(contrast, spec, study)
    inference = study.get("inference") or {}
    if contrast.statistic == "yuen":
        trim = inference.get("trim")
        test = f"Yuen's trimmed t test{f' (trim {fmt(trim)})' if trim is not None else ''} (Yuen 1974)"
    else:
        test = "t test"
    if is_design(spec):
        return design_sentence(contrast.name, spec, n=contrast.n, tail=contrast.tail, test_words=test)
    design = ""
    if spec.get("conditions"):
        design = ", " + " − ".join(map(str, spec["conditions"]))
    if spec.get("groups"):
        design += " between groups " + " and ".join(map(str, spec["groups"]))
    return (
        f"Contrast {contrast.name} ({contrast.test}{design}) was tested at each point with a "
        f"{test}, {contrast.tail}, across n = {contrast.n} participants."
    )


def _resampling(contrast: ReportedContrast, study: dict) -> str:
    info = contrast.nulls
    if contrast.test == "regression":
        return regression_resampling(contrast, study)
    if not info:
        return ""
    scheme = info.get("scheme", "permutation")
    if info.get("exact"):
        text = (
            f" Its permutation null enumerated all {fmt(info.get('n_rows'))} {scheme} "
            f"assignments (an exact test; p = share of assignments at least as extreme, "
            f"the observed one included)"
        )
    else:
        text = (
            f" Its permutation null used {fmt(info.get('permutations'))} random {scheme} "
            f"assignments drawn with seed {fmt(study.get('seed'))} ({fmt(info.get('n_rows'))} "
            f"rows, the observed assignment included; p = (1 + b)/(1 + m), Phipson & Smyth 2010)"
        )
    return text + f"; the smallest attainable p was {fmt(info.get('smallest_p'))}."


def _correction(contrast: ReportedContrast, correction: ReportedCorrection, entry: dict, *, voltage=False) -> str:
    kind = method_kind(correction.method)
    described = _DESCRIPTIONS.get(kind, f"the '{correction.method}' correction")
    text = (
        f"In contrast {contrast.name}, correction {correction.name} ({described}; "
        f"{_parameter_text(correction_parameters(entry, correction, voltage=voltage))}) declared "
        f"{correction.n_significant} of {correction.mask.size} points significant"
    )
    if np.isfinite(correction.threshold):
        what = {
            "p": "p threshold",
            "stat": "critical |statistic|",
            "cluster": "critical cluster statistic",
            "tfce": "critical TFCE value",
        }
        text += f" ({what.get(correction.threshold_kind, 'threshold')} {fmt(correction.threshold)})"
    return text + _cluster_count(correction) + "."


def _hz_list(values: str) -> str:
    """'4.0, 4.59' -> '4 and 4.59 Hz'."""
    numbers = [f"{float(v):g}" for v in values.split(",") if v.strip()]
    return (", ".join(numbers[:-1]) + " and " + numbers[-1] if len(numbers) > 1 else numbers[0]) + " Hz"


def _plural(count: int, noun: str) -> str:
    return f"{count} {noun}" + ("" if count == 1 else "s")


def _cluster_count(correction: ReportedCorrection) -> str:
    """How many clusters (or TFCE regions) hold the significant points, exact and grammatical."""
    if correction.threshold_kind == "tfce":
        return f", in {_plural(len(correction.clusters), 'connected region')}" if correction.clusters else ""
    if correction.cluster_id is None or correction.threshold_kind != "cluster":
        return ""
    formed = len(correction.clusters)
    significant = np.unique(correction.cluster_id[correction.mask & (correction.cluster_id != 0)]).size
    if formed == 0:
        return "; no cluster formed at the forming threshold"
    if significant == 0:
        return (
            "; the one cluster formed was not significant"
            if formed == 1
            else f"; none of the {formed} clusters formed was significant"
        )
    if significant == formed:
        return f", in {_plural(formed, 'cluster')}"
    return f", in {significant} of the {formed} clusters formed"


def kinds_used(run: Run) -> list[str]:
    """Reference keys of every method the run used, in a stable order."""
    study = run.study
    used = []
    method = str((study.get("decomposition") or {}).get("method", "morlet")).lower()
    if method == "multitaper":
        used += ["multitaper", "nw"]
    if method != "none":  # the cone of influence of a decomposition
        used.append("edges")
    if any(c.statistic == "yuen" for c in run.contrasts):
        used.append("yuen")
    if any(c.nulls and not c.nulls.get("exact") for c in run.contrasts):
        used.append("phipson")
    if any(c.test == "regression" and c.nulls for c in run.contrasts):
        used += ["freedmanlane", "winkler"]
    for entry in correction_entries(study).values():
        kind = method_kind(entry.get("method", ""))
        if kind != "other" and kind not in used:
            used.append(kind)
    if "cluster" in used:
        used.append("clusterwarn")
    return used + design_reference_keys(study.get("contrasts", []))


def methods_from_run(run: Run) -> str:
    """The methods paragraph (markdown) of a run already read."""
    study = run.study
    inference = study.get("inference") or {}
    entries = correction_entries(study)
    specs = {c["name"]: c for c in study.get("contrasts", [])}
    parts = [
        "## Methods",
        "",
        _subjects(run, study),
        "",
        _decomposition(study) + _baseline_caveat(run),
        "",
        _window(study, run),
    ]
    for contrast in run.contrasts:
        parts += ["", _contrast(contrast, specs.get(contrast.name, {}), study) + _resampling(contrast, study)]
    parts += [
        "",
        f"Corrections for multiple comparisons used α = {fmt(inference.get('alpha'))}"
        f" ({inference.get('tail', 'two-sided')}; family: {inference.get('family', 'each contrast')}).",
    ]
    for contrast in run.contrasts:
        for correction in contrast.corrections:
            entry = entries.get(correction.name, {})
            parts += [f"- {_correction(contrast, correction, entry, voltage=is_voltage_study(study))}"]
    versions = ", ".join(f"{name} {version}" for name, version in package_versions().items())
    parts += ["", f"Analyses ran in famwise with {versions} (seed {fmt(study.get('seed'))}).", "", "### References", ""]
    parts += [f"- {REFERENCES[kind]}" for kind in kinds_used(run)]
    return "\n".join(parts) + "\n"


def methods_text(study: dict, output_dir: Path) -> str:
    """The methods paragraph (markdown) from the spec and the run's result files.

    Parameters
    ----------
    study : dict
        The validated spec as JSON; it takes precedence over ``study.json``.
    output_dir : Path
        The run's output folder.

    Returns
    -------
    str
        Markdown: a "Methods" heading, paragraphs, a list of corrections and
        their outcome, software versions and references.
    """
    run = read_run(Path(output_dir))
    return methods_from_run(replace(run, study=study))
