"""The report's study-level sections: study, subjects, channel graph and provenance, and the figure writer.

Each function returns HTML; the channel graph figure is written as PNG and SVG on the way.
"""

from pathlib import Path

from famwise.figure_style import figure_style, save_figure
from famwise.report import figures
from famwise.report.html import esc, figure, note, table
from famwise.report.results import Run, correction_entries
from famwise.report.study_words import baseline_words, decomposition_words, inference_words, named, window_words


class FigureWriter:
    """Saves figures under one folder and remembers their stems."""

    def __init__(self, folder: Path):
        self.folder = Path(folder)
        self.stems: list[str] = []

    def __call__(self, fig, stem: str, *, caption: str, alt: str) -> str:
        png = save_figure(fig, self.folder, stem)
        self.stems.append(stem)
        return figure(png, caption=caption, alt=alt, link=f"figures/{stem}.svg")


def study_section(run: Run, spec_text: str) -> str:
    """Spec summary and the full spec text."""
    study = run.study
    tf = study.get("decomposition") or {}
    analysis = study.get("analysis") or {}
    inference = study.get("inference") or {}
    rows = [
        ["study", study.get("name", "")],
        ["seed", study.get("seed", "")],
        ["conditions", "; ".join(f"{k}: {', '.join(map(str, v))}" for k, v in (study.get("conditions") or {}).items())],
        ["decomposition", decomposition_words(tf)],
        ["baseline", baseline_words(tf.get("baseline") or {})],
        ["analysis window", window_words(analysis, voltage=tf.get("method") == "none")],
        ["contrasts", "; ".join(f"{c['name']} ({c.get('test', '')})" for c in study.get("contrasts", []))],
        ["inference", inference_words(inference)],
        [
            "corrections",
            "; ".join(named(name, entry.get("method", "")) for name, entry in correction_entries(study).items()),
        ],
    ]
    axes = "times, channels" if tf.get("method") == "none" else "times, frequencies, channels"
    window = note(
        f"The analysis window ({axes}) and the corrections must "
        "have been chosen before looking at the data. A window picked after seeing "
        "where the effect is makes every p-value in this report too small, whatever "
        "the correction."
    )
    if run.warnings:
        window += note(
            "Warnings raised while the subjects were decomposed: "
            + "; ".join(esc(line) for line in run.warnings)
            + ".",
            warning=True,
        )
    return (
        f'<h2 id="study">Study</h2>{table(["setting", "value"], rows)}{window}'
        f"<details><summary>Full spec as written</summary><pre>{esc(spec_text)}</pre></details>"
    )


def subjects_section(run: Run) -> str:
    """Included and excluded subjects with epochs per condition."""
    if not run.subjects:
        return '<h2 id="subjects">Subjects</h2><p>No subjects table was found for this run.</p>'
    columns = list(run.subjects[0].keys())
    counted = [c for c in columns if c.startswith(("n_", "rejected_"))]
    rows = [[_cell(r.get(c, "")) if c in counted else r.get(c, "") for c in columns] for r in run.subjects]
    classes = ["excluded" if r.get("status") == "excluded" else "" for r in run.subjects]
    included = sum(r.get("status", "included") == "included" for r in run.subjects)
    return (
        f'<h2 id="subjects">Subjects</h2><p class="summary">{included} included, '
        f"{len(run.subjects) - included} excluded. Columns n_&lt;condition&gt; give the epochs "
        f"kept after rejection, rejected_&lt;condition&gt; the epochs rejected.</p>"
        + table(columns, rows, row_classes=classes)
    )


def _cell(value: str):
    try:
        number = float(value)
    except (TypeError, ValueError):
        return value
    return int(number) if number.is_integer() else number


def graph_section(run: Run, write: FigureWriter) -> str:
    """The channel neighbor graph figure."""
    if run.graph is None:
        return '<h2 id="channels">Channel graph</h2><p>No channel graph was found for this run.</p>'
    with figure_style():
        fig = figures.graph_figure(run.graph, run.positions)
    caption = (
        f"<b>Channel neighbor graph.</b> {len(run.graph.channels)} channels, "
        f"{run.graph.n_edges} neighbor pairs; seen from above, nose up. Clusters grow "
        "only along these links."
    )
    return '<h2 id="channels">Channel graph</h2>' + write(
        fig, "channel_graph", caption=caption, alt="channel neighbor graph"
    )


def provenance_section(record: dict) -> str:
    """Fingerprints, versions, result and input hashes."""
    rows = [
        ["results fingerprint (SHA-256)", record.get("results_fingerprint")],
        ["spec fingerprint (SHA-256)", record["spec_fingerprint"]],
        ["seed", record.get("seed")],
        ["permutations", record.get("permutations")],
        ["started", record.get("started")],
        ["finished", record.get("finished")],
    ]
    rows += [[f"package {k}", v] for k, v in record["packages"].items()]
    files = [[name, info["bytes"], info["sha256"]] for name, info in record["input_files"].items()]
    masks = [
        [f"{contrast}/{name}", info["n_significant"], info["arrays"]["mask"]]
        for contrast, entry in record.get("results", {}).items()
        for name, info in entry["corrections"].items()
    ]
    html = (
        '<h2 id="provenance">Provenance</h2><p>A rerun of the same spec on the same inputs '
        "gives the same provenance.json apart from the start and end times. Two runs with the "
        "same results fingerprint have identical statistics, corrected p-values, masks and "
        "cluster tables; <code>famwise compare</code> names what differs.</p>"
        + table(["item", "value"], [[k, "" if v is None else v] for k, v in rows])
    )
    if masks:
        html += "<h4>Significance masks</h4>" + table(["contrast/correction", "points", "SHA-256"], masks)
    if files:
        html += "<h4>Input files</h4>" + table(["file", "bytes", "SHA-256"], files)
    return html
