"""Report section of the power simulation: reads ``power/<contrast>.tsv`` (+ .json, .png), recomputes nothing."""

import json
from pathlib import Path

from famwise.power.table import COLUMNS, SIDECAR, power_basis, read_table
from famwise.power.text import methods_sentences
from famwise.report.html import anchor, esc, figure, note, table


def power_section_html(output_dir: Path, corrections: dict[str, list[dict]]) -> str | None:
    """Report section: every contrast's power table, figure, assumptions and methods sentence; None when none ran.

    ``corrections`` maps each contrast to the settings of its current
    correction results; a table whose ``basis`` differs from the current one
    (other pilot maps or corrections) gets a warning.
    """
    folder = Path(output_dir) / "power"
    files = sorted(folder.glob("*.tsv")) if folder.is_dir() else []
    if not files:
        return None
    parts = [
        '<section id="power"><h2>Power for planning a study</h2>',
        note(
            "Simulated studies resample the residual maps of this study's subjects with replacement and add a known effect "
            "inside a region; every configured correction is applied to each. Power = share of studies with any significant "
            "point in the region; recovered = mean share of the region's points found; false positives = share of studies "
            "with a significant point outside the region, where the effect is zero. These numbers describe studies like this "
            "pilot under the stated effect, not the probability that the effect exists."
        ),
    ]
    titles = {c: SIDECAR[c]["Description"] for c in COLUMNS}
    for path in files:
        contrast = path.stem
        info = json.loads(path.with_suffix(".json").read_text(encoding="utf-8"))["Power"]
        rows = read_table(path)
        parts.append(f'<h3 id="{anchor("power", contrast)}">{esc(contrast)}</h3>')
        parts.append(note("Assumptions: " + " ".join(info["assumptions"]), warning=True))
        if info.get("basis") != power_basis(Path(output_dir) / "contrasts" / contrast, corrections.get(contrast, [])):
            parts.append(
                note(
                    "This power table was computed before the latest change to this contrast's data or "
                    "corrections: run famwise power again.",
                    warning=True,
                )
            )
        if info["permutations"] < info["study_permutations"]:
            parts.append(
                note(
                    f"Each simulated study was tested with {info['permutations']} permutations "
                    f"(the study uses {info['study_permutations']}).",
                    warning=True,
                )
            )
        png = path.with_suffix(".png")
        if png.is_file():
            parts.append(
                figure(
                    png.read_bytes(),
                    caption=f"<b>{esc(contrast)}</b>: power per correction against the "
                    "number of participants; bands are 95% Monte Carlo intervals.",
                    alt=f"power {contrast}",
                    link=f"../power/{contrast}.svg",
                )
            )
        parts.append(f"<p><b>For a proposal:</b> {esc(methods_sentences(rows, info))}</p>")
        cells = [[_cell(key, row[key]) for key in COLUMNS] for row in rows]
        parts.append(table(list(COLUMNS), cells, titles=titles))
    parts.append("</section>")
    return "".join(parts)


def _cell(key: str, value):
    if value is None:
        return "n/a"
    if key in ("n", "studies", "detections", "false_positive_studies", "permutations"):
        return int(value)
    return value
