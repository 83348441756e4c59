"""Report section of the calibration: reads ``calibration/<contrast>.tsv`` (+ .json, .png), recomputes nothing."""

import json
from pathlib import Path

from famwise.calibrate.settings import UNCORRECTED
from famwise.calibrate.table import COLUMNS, SIDECAR, calibration_basis, read_table
from famwise.report.html import anchor, esc, figure, note, table


def calibration_section_html(output_dir: Path, corrections: dict[str, list[dict]]) -> str | None:
    """Report section: every contrast's calibration table and figure, or None when none has been run.

    Reads ``<output>/calibration/<contrast>.tsv`` (+ .json, .png); recomputes
    nothing. ``corrections`` maps each contrast to the settings of its
    current correction results (the ``settings`` of their ``result.npz``); a
    table whose ``calibration_basis`` differs from the current one gets a
    warning that it describes earlier data or corrections.
    """
    folder = Path(output_dir) / "calibration"
    files = sorted(folder.glob("*.tsv")) if folder.is_dir() else []
    if not files:
        return None
    parts = [
        '<section id="calibration"><h2>Error-rate calibration</h2>',
        note(
            "Null datasets were made from the subjects' own maps (random sign flips, or shuffled labels, covariate or "
            "conditions, or, for a regression, the nuisance-only fit plus shuffled residuals), which keeps the data's real smoothness; each went through every configured correction. "
            "FWER = share of null datasets with any significant point, with its exact binomial 95% interval. "
            "In a null dataset every detection is false, so the mean false discovery proportion equals the FWER. "
            "Rows in bold: the whole interval lies above the nominal level (the correction is liberal on these data)."
        ),
    ]
    titles = {c: SIDECAR[c]["Description"] for c in COLUMNS}
    for path in files:
        contrast = path.stem
        info = json.loads(path.with_suffix(".json").read_text(encoding="utf-8")).get("Calibration", {})
        rows = read_table(path)
        cells = [
            [
                int(v) if k in ("datasets", "detections") or (k == "permutations" and v != "n/a") else v
                for k, v in row.items()
            ]
            for row in rows
        ]
        classes = [
            "significant" if r["method"] != UNCORRECTED and r["fwer_ci_low"] > r["nominal"] else "" for r in rows
        ]
        parts.append(f'<h3 id="{anchor("calibration", contrast)}">{esc(contrast)}</h3>')
        recorded = info.get("basis")
        current = calibration_basis(Path(output_dir) / "contrasts" / contrast, corrections.get(contrast, []))
        if recorded != current:
            parts.append(
                note(
                    "This calibration was computed before the latest change to this contrast's data or "
                    "corrections, so it may not describe the results above: run famwise calibrate "
                    "again.",
                    warning=True,
                )
            )
        if info.get("permutations_reduced"):
            parts.append(
                note(
                    f"Each null dataset was tested with {info['permutations']} permutations "
                    f"(the study uses {info['study_permutations']}).",
                    warning=True,
                )
            )
        parts.append(table(list(COLUMNS), cells, titles=titles, row_classes=classes))
        png = path.with_suffix(".png")
        if png.is_file():
            parts.append(
                figure(
                    png.read_bytes(),
                    caption=f"<b>{esc(contrast)}</b>: empirical FWER per correction "
                    f"(points, 95% interval) and its nominal level (dashes).",
                    alt=f"calibration {contrast}",
                    link=f"../calibration/{contrast}.svg",
                )
            )
    parts.append("</section>")
    return "".join(parts)
