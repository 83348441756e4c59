"""The study report: HTML page, figures, methods paragraph and provenance.

The report only renders: it reads the result files of a run (layout in
DESIGN.md, "Data contracts") and never recomputes statistics.
"""

from datetime import UTC, datetime
from pathlib import Path

from famwise.figure_style import write_atomic
from famwise.report.calibration import calibration_section_html
from famwise.report.explorer import assets as explorer_assets
from famwise.report.html import anchor, markdown, page
from famwise.report.methods import methods_from_run, methods_text
from famwise.report.power import power_section_html
from famwise.report.provenance import write_provenance
from famwise.report.results import read_run
from famwise.report.sections import contrast_section
from famwise.report.study_sections import (
    FigureWriter,
    graph_section,
    provenance_section,
    study_section,
    subjects_section,
)

__all__ = ["build_report", "methods_text", "write_provenance"]


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def build_report(
    output_dir: Path,
    *,
    spec_text: str,
    spec_path: Path,
    input_files: list[Path] | dict[str, Path],
    started: str | None = None,
) -> Path:
    """Write the study report of a finished run.

    Writes ``report/index.html`` (self-contained), ``report/figures/*.png``
    and ``*.svg`` (stable names ``<contrast>__<correction>__map`` and so
    on), ``report/methods.md`` and ``report/provenance.json``, each
    atomically. Figures of an earlier report that this run no longer makes
    are removed.

    Parameters
    ----------
    output_dir : Path
        The run's output folder (holds ``study.json``, ``subjects.tsv``,
        ``channels/`` and ``contrasts/``).
    spec_text : str
        The spec file's text, shown in the report and kept in the provenance.
    spec_path : Path
        The spec file; input paths are recorded relative to its folder.
    input_files : list of Path, or dict of str to Path
        The files the run read (subject data, channel files), hashed into
        the provenance; a mapping names each as the spec does.
    started : str, optional
        When the run started (ISO 8601); defaults to now.

    Returns
    -------
    Path
        The path of ``report/index.html``.
    """
    output_dir = Path(output_dir)
    started = started or _now()
    run = read_run(output_dir)
    folder = output_dir / "report"
    write = FigureWriter(folder / "figures")
    body = [study_section(run, spec_text), subjects_section(run), graph_section(run, write)]
    body += [contrast_section(run, contrast, write) for contrast in run.contrasts]
    calibration = calibration_section_html(
        output_dir, {c.name: [x.settings for x in c.corrections] for c in run.contrasts}
    )
    if calibration:
        body.append(calibration)
    power = power_section_html(output_dir, {c.name: [x.settings for x in c.corrections] for c in run.contrasts})
    if power:
        body.append(power)
    methods = methods_from_run(run)
    write_atomic(folder / "methods.md", methods.encode("utf-8"))
    record = write_provenance(
        folder / "provenance.json",
        spec_text=spec_text,
        study=run.study,
        input_files=input_files,
        started=started,
        finished=_now(),
        root=Path(spec_path).parent,
        output_dir=output_dir,
    )
    paragraph = markdown(methods.removeprefix("## Methods\n"))
    body += [f'<h2 id="methods">Methods</h2><div class="methods">{paragraph}</div>', provenance_section(record)]
    if any('class="explorer"' in part for part in body):
        body.append(explorer_assets())
    nav = [("study", "Study"), ("subjects", "Subjects"), ("channels", "Channel graph")]
    nav += [(anchor("contrast", c.name), f"Contrast {c.name}") for c in run.contrasts]
    if calibration:
        nav.append(("calibration", "Calibration"))
    if power:
        nav.append(("power", "Power"))
    nav += [("methods", "Methods"), ("provenance", "Provenance")]
    title = f"famwise report: {run.study.get('name', output_dir.name)}"
    subtitle = (
        f"{len(run.contrasts)} contrasts, "
        f"{len((run.study.get('inference') or {}).get('corrections', []))} corrections; "
        f"results fingerprint {record['results_fingerprint'][:12]}; "
        f"spec fingerprint {record['spec_fingerprint'][:12]}; finished {record['finished']}"
    )
    index = folder / "index.html"
    write_atomic(index, page(title=title, subtitle=subtitle, nav=nav, body="".join(body)).encode("utf-8"))
    kept = set(write.stems)
    for old in (folder / "figures").glob("*"):
        if old.suffix in {".png", ".svg"} and old.stem not in kept:
            old.unlink()
    return index
