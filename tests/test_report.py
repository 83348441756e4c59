"""The study report built from a synthetic output folder (tests/report_fixture.py)."""

import csv
import json
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest

from famwise.errors import UserError
from famwise.report import build_report, methods_text
from famwise.report.methods import REFERENCES
from famwise.report.results import read_run
from famwise.report.sections import cluster_block, correction_notes, permutation_notes

from report_fixture import write_output

CHROMIUM = shutil.which("chromium")


class _Page(HTMLParser):
    """Collects tables (class, header, rows) and every src/href of a page."""

    def __init__(self):
        super().__init__()
        self.tables, self.links, self._cell, self._row = [], [], None, None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        for key in ("src", "href"):
            if key in attrs:
                self.links.append((tag, attrs[key]))
        if tag == "table":
            self.tables.append({"class": attrs.get("class", ""), "rows": []})
        elif tag == "tr":
            self._row = []
        elif tag in {"td", "th"}:
            self._cell = ""

    def handle_endtag(self, tag):
        if tag in {"td", "th"} and self._row is not None:
            self._row.append(self._cell.strip())
            self._cell = None
        elif tag == "tr" and self.tables:
            self.tables[-1]["rows"].append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    root = tmp_path_factory.mktemp("study")
    (root / "data").mkdir()
    inputs = []
    for name in ("sub-01.npz", "sub-02.npz"):
        (root / "data" / name).write_bytes(name.encode() * 100)
        inputs.append(root / "data" / name)
    spec = root / "study.yaml"
    spec.write_text("version: 1\nname: attention alpha\n")
    output = root / "results"
    write_output(output)
    index = build_report(
        output, spec_text=spec.read_text(), spec_path=spec, input_files=inputs, started="2026-01-01T00:00:00+00:00"
    )
    page = _Page()
    page.feed(index.read_text(encoding="utf-8"))
    return {"root": root, "output": output, "index": index, "page": page, "html": index.read_text(encoding="utf-8")}


def test_report_writes_every_file_with_stable_names(built):
    report = built["output"] / "report"
    assert built["index"] == report / "index.html"
    for name in ("methods.md", "provenance.json"):
        assert (report / name).is_file()
    stems = [
        "channel_graph",
        "attention__uncorrected__map",
        "attention__holm__map",
        "attention__fdr__map",
        "attention__max-stat__map",
        "attention__max-stat__null",
        "attention__clusters__map",
        "attention__clusters__null",
        "attention__clusters__cluster-pos1",
        "attention__clusters__values",
        "attention__planned__values",
        "attention__tfce__map",
        "attention__tfce__null",
    ]
    for stem in stems:
        assert (report / "figures" / f"{stem}.png").stat().st_size > 1000
        assert (report / "figures" / f"{stem}.svg").read_text().lstrip().startswith("<?xml")
    # the non-significant cluster 2 (p = 0.31) gets no figure
    assert not (report / "figures" / "attention__clusters__cluster-neg2.png").exists()
    assert not list(report.rglob("*.tmp"))


def test_report_is_self_contained(built):
    images = [src for tag, src in built["page"].links if tag == "img"]
    assert len(images) == 13  # the figures listed in the test above
    assert all(src.startswith("data:image/png;base64,") for src in images)
    for _, target in built["page"].links:
        assert not re.match(r"^(https?:)?//", target), target
    assert "<script src" not in built["html"]  # the explorer's script is inline
    assert "@media print" in built["html"]


def test_report_shows_every_correction_with_its_count(built):
    run = read_run(built["output"])
    for correction in run.contrasts[0].corrections:
        shown = correction.name if correction.name == correction.method else f"{correction.name} ({correction.method})"
        assert f"<b>{shown}</b>: {correction.n_significant} significant points" in built["html"]
    assert (
        "<b>holm</b>: " in built["html"] and "holm (holm)" not in built["html"]
    )  # the method only when the name differs
    uncorrected = int((run.contrasts[0].p <= 0.05).sum())
    assert f"{uncorrected} of {run.contrasts[0].stat.size} points with p ≤ 0.05" in built["html"]


def test_study_table_reads_as_words(built):
    html = built["html"]
    assert "dB change from the -400 to -100 ms baseline, each condition separately" in html
    assert "pooled False" not in html and "single_epoch" not in html and "[-400" not in html


def test_report_subjects_table_matches_subjects_tsv(built):
    with open(built["output"] / "subjects.tsv", newline="") as handle:
        rows = list(csv.reader(handle, delimiter="\t"))
    table = next(t for t in built["page"].tables if t["rows"][0] == rows[0])
    assert table["rows"][1:] == rows[1:]


def test_cluster_table_numbers_match_clusters_tsv(built):
    with open(built["output"] / "contrasts/attention/clusters/clusters.tsv", newline="") as handle:
        expected = list(csv.DictReader(handle, delimiter="\t"))
    table = next(t for t in built["page"].tables if "clusters" in t["class"].split())
    header, rows = table["rows"][0], table["rows"][1:]
    assert header == list(expected[0])
    assert len(rows) == len(expected)
    for shown, stored in zip(rows, expected):
        for column, cell in zip(header, shown):
            try:
                value = float(stored[column])
            except ValueError:
                assert cell == stored[column], column
                continue
            # printed with 4 significant digits
            assert float(cell) == pytest.approx(value, rel=6e-4, abs=1e-12), column


def _numbers(text: str) -> list[float]:
    return [float(x) for x in re.findall(r"(?<![\w.])-?\d+(?:\.\d+)?(?:e-?\d+)?", text)]


def _known_numbers(output: Path) -> list[float]:
    known = [1.0, 10.0]  # "(1 + b)/(1 + m)" and "10 log10"
    study = json.loads((output / "study.json").read_text())

    def walk(value):
        if isinstance(value, dict):
            for item in value.values():
                walk(item)
        elif isinstance(value, list):
            for item in value:
                walk(item)
        elif isinstance(value, (int, float)) and not isinstance(value, bool):
            known.append(float(value))

    walk(study)
    walk(json.loads((output / "contrasts/attention/nulls/info.json").read_text()))
    with np.load(output / "contrasts/attention/observed.npz") as data:
        known += list(map(float, data["stat"].shape)) + [float(data["stat"].size), float(data["n"])]
    for folder in (output / "contrasts/attention").iterdir():
        if (folder / "result.npz").is_file():
            with np.load(folder / "result.npz") as data:
                known += [float(data["n_significant"]), float(data["threshold"])]
                known += [
                    float(v)
                    for v in json.loads(str(data["settings"]))["correction"].values()
                    if isinstance(v, (int, float)) and not isinstance(v, bool)
                ]
            if (folder / "clusters.tsv").is_file():
                with open(folder / "clusters.tsv") as handle:
                    known.append(float(sum(1 for _ in handle) - 1))
    with np.load(output / "channels/graph.npz") as data:
        known += [float(len(data["indices"]) // 2), float(len(data["channels"]))]
    with open(output / "subjects.tsv", newline="") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    included = [r for r in rows if r["status"] == "included"]
    known += [float(len(included)), float(len(rows) - len(included))]
    for condition in study["conditions"]:
        counts = [float(r[f"n_{condition}"]) for r in included]
        known += [float(np.mean(counts)), min(counts), max(counts)]
    for reference in REFERENCES.values():
        known += _numbers(reference)
    return known


def test_every_number_in_the_methods_paragraph_comes_from_the_files(built):
    text = (built["output"] / "report" / "methods.md").read_text()
    body = text.split("Analyses ran in famwise")[0]
    body = (
        re.sub(r"\d+ channels × \d+ frequencies × \d+ time points", "", body)
        + " "
        + " ".join(re.findall(r"\d+ channels × \d+ frequencies × \d+ time points", body))
    )
    with open(built["output"] / "subjects.tsv", newline="") as handle:
        for row in csv.DictReader(handle, delimiter="\t"):
            body = body.replace(f"{row['subject']}: ", "")  # subject ids are labels
    known = np.array(_known_numbers(built["output"]))
    for number in _numbers(body):
        assert np.any(np.isclose(known, abs(number), rtol=6e-4, atol=0)) or np.any(
            np.isclose(known, number, rtol=6e-4, atol=0)
        ), number


def test_methods_sentences_match_each_result(built):
    text = (built["output"] / "report" / "methods.md").read_text()
    output = built["output"]
    info = json.loads((output / "contrasts/attention/nulls/info.json").read_text())
    found = re.search(r"used (\d+) random sign-flip assignments drawn with seed (\d+) \((\d+) rows,", text)
    assert found and [int(g) for g in found.groups()] == [info["permutations"], 7, info["n_rows"]]
    smallest = re.search(r"smallest attainable p was (\d+(?:\.\d+)?(?:e-?\d+)?)", text).group(1)
    assert float(smallest) == pytest.approx(info["smallest_p"], rel=6e-4)
    claims = re.findall(
        r"correction (\S+) \(.*?declared (\d+) of (\d+) points significant"
        r"(?: \((?:p threshold|critical \|statistic\||critical cluster statistic|"
        r"critical TFCE value) ([\d.e+-]+)\))?",
        text,
    )
    assert [c[0] for c in claims] == ["holm", "fdr", "max-stat", "clusters", "tfce"]
    for name, count, total, threshold in claims:
        with np.load(output / "contrasts/attention" / name / "result.npz") as data:
            assert int(count) == int(data["n_significant"]) == int(data["mask"].sum())
            assert int(total) == data["mask"].size
            assert float(threshold) == pytest.approx(float(data["threshold"]), rel=6e-4)
    assert "in 1 of the 2 clusters formed" in text
    assert "Data of 10 participants" in text and "11: left the session early" in text
    # the references of exactly the methods used
    for cited in (
        "Holm S (1979)",
        "Benjamini Y, Hochberg Y (1995)",
        "Westfall PH, Young SS (1993)",
        "Maris E, Oostenveld R (2007)",
        "Smith SM, Nichols TE (2009)",
        "Phipson B, Smyth GK (2010)",
        "Torrence C, Compo GP (1998)",
    ):
        assert cited in text
    for absent in ("Yuen KK (1974)", "Benjamini Y, Yekutieli D (2001)", "Thomson DJ (1982)"):
        assert absent not in text


def test_interpretation_notes_are_shown(built):
    html = built["html"]
    assert "Sassenhagen &amp; Draschkow 2019" in html
    assert "expected share of false discoveries" in html
    assert "must have been chosen before looking at the data" in html
    assert "Cluster 1</b> (attend &gt; ignore), p = 0.004" in html


def test_few_subjects_warn_that_nothing_can_be_significant(tmp_path):
    # n = 5 subjects: 32 sign flips, smallest two-sided p 2/32 = 0.0625 > 0.05
    # (common practice, Nichols & Holmes 2002)
    write_output(tmp_path, n_included=5, exact=True)
    run = read_run(tmp_path)
    note = permutation_notes(run.contrasts[0], run.study)
    assert "No permutation result can be significant" in note and "0.0625" in note
    write_output(tmp_path, n_included=8, exact=True)
    run = read_run(tmp_path)
    assert "come in steps this coarse" in permutation_notes(run.contrasts[0], run.study)
    write_output(tmp_path, n_included=8, exact=False, permutations=9999)
    run = read_run(tmp_path)
    note = permutation_notes(run.contrasts[0], run.study)
    assert 'class="note"' in note and "0.0001" in note


def test_bonferroni_type_methods_warn_when_permutation_p_cannot_pass(tmp_path):
    write_output(tmp_path)
    run = read_run(tmp_path)
    contrast = run.contrasts[0]
    holm = contrast.corrections[0]
    settings = dict(holm.settings, correction=dict(holm.settings["correction"], pvalues="permutation"))
    permuted = type(holm)(**{**holm.__dict__, "settings": settings})
    # smallest p 0.001 > alpha / m = 0.05 / 6560
    assert "cannot declare any point significant" in correction_notes(permuted, contrast, run.study)
    assert "cannot declare" not in correction_notes(holm, contrast, run.study)


def test_missing_or_inconsistent_results_raise_user_errors(tmp_path):
    with pytest.raises(UserError, match=r"expected the study spec at .*study.json"):
        read_run(tmp_path)
    write_output(tmp_path)
    (tmp_path / "contrasts/attention/observed.npz").unlink()
    with pytest.raises(UserError, match=r"observed statistics of contrast 'attention'"):
        read_run(tmp_path)
    write_output(tmp_path)
    path = tmp_path / "contrasts/attention/holm/result.npz"
    with np.load(path) as data:
        arrays = dict(data)
    arrays["mask"] = arrays["mask"][:, :2]
    np.savez(path, **arrays)
    with pytest.raises(UserError, match=r"mask of correction 'holm' .* shape \(20, 8, 41\), found \(20, 2, 41\)"):
        read_run(tmp_path)


def _chromium(args: list[str], folder: Path) -> subprocess.CompletedProcess:
    command = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={folder / 'profile'}",
        "--enable-logging=stderr",
        "--v=0",
        *args,
    ]
    return subprocess.run(command, capture_output=True, text=True, timeout=120)


def _console(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if ":CONSOLE" in line]


@pytest.mark.skipif(
    CHROMIUM is None, reason="Debian's chromium is not installed (apt-get install -y chromium; .ci/run installs it)"
)
def test_report_renders_in_a_headless_browser(built, tmp_path):
    # positive control: a page with a script error is caught by the same check
    bad = tmp_path / "bad.html"
    bad.write_text("<!doctype html><html><body><script>missing();</script></body></html>")
    assert _console(_chromium(["--dump-dom", bad.as_uri()], tmp_path).stderr)

    shot = tmp_path / "shot.png"
    run = _chromium([f"--screenshot={shot}", "--window-size=1200,2000", built["index"].as_uri()], tmp_path)
    assert run.returncode == 0, run.stderr[-2000:]
    assert _console(run.stderr) == []
    pixels = matplotlib.image.imread(shot)[..., :3]
    assert pixels.shape[:2] == (2000, 1200)
    # a blank page is one colour; the top of the report holds text, tables and the graph figure
    not_white = np.mean(np.any(pixels < 0.9, axis=-1))
    colours = np.unique((pixels.reshape(-1, 3) * 255).round().astype(np.uint8), axis=0)
    assert not_white > 0.01 and len(colours) > 100
    dom = _chromium(["--dump-dom", built["index"].as_uri()], tmp_path)
    assert _console(dom.stderr) == []
    assert "Contrast attention" in dom.stdout and "Provenance" in dom.stdout


def test_cluster_table_shows_significant_and_the_largest_other_clusters(tmp_path):
    write_output(tmp_path)
    run = read_run(tmp_path)
    contrast = run.contrasts[0]
    clusters = next(c for c in contrast.corrections if c.name == "clusters")
    first = clusters.clusters[0]
    rows = [first] + [dict(first, id=-(k + 2), sign="-", p=0.5 + k / 100) for k in range(14)]
    many = type(clusters)(**{**clusters.__dict__, "clusters": rows})
    page = _Page()
    page.feed(cluster_block(contrast, many, {}, run.study, None, write=None))
    table = page.tables[0]
    assert [row[0] for row in table["rows"][1:]] == ["1"] + [str(-(k + 2)) for k in range(10)]
    assert "4 smaller clusters with p &gt; 0.05 are not shown" in cluster_block(
        contrast, many, {}, run.study, None, write=None
    )


def test_methods_name_multitaper_and_yuen_with_their_settings(tmp_path):
    study = write_output(tmp_path, statistic="yuen")
    study["decomposition"] |= {
        "method": "multitaper",
        "taper_length_ms": 400.0,
        "nw": 3.0,
        "cycles": None,
        "average": "trimmed",
    }
    text = methods_text(study, tmp_path)
    assert "DPSS) tapers (Thomson 1982) at 8 frequencies from 4 to 30 Hz (log spacing)" in text
    assert (
        "with tapers 400 ms long and a time-half-bandwidth product NW of 3 (5 tapers; Percival & Walden 1993)" in text
    )
    assert "Percival DB, Walden AT (1993)" in text
    assert "trimmed mean (trim 0.2 per end)" in text
    assert "Yuen's trimmed t test (trim 0.2) (Yuen 1974)" in text
    assert "Yuen KK (1974)" in text and "Thomson DJ (1982)" in text
    # the edge rule is cited for the excluded points, not for the tapers
    assert "Points whose window reached beyond the epoch (the cone of influence; Torrence & Compo 1998)" in text


def test_report_shows_the_results_fingerprint(built):
    record = json.loads((built["output"] / "report" / "provenance.json").read_text())
    fingerprint = record["results_fingerprint"]
    head = built["html"][: built["html"].index('id="study"')]
    assert f"results fingerprint {fingerprint[:12]}" in head  # at a glance, under the title
    rows = {row[0]: row[1] for table in built["page"].tables for row in table["rows"] if len(row) == 2}
    assert rows["results fingerprint (SHA-256)"] == fingerprint


@pytest.mark.parametrize(
    ("kind", "ids", "significant", "expected"),
    [
        ("cluster", [], [], "declared 0 of 12 points significant; no cluster formed at the forming threshold."),
        ("cluster", [1], [], "declared 0 of 12 points significant; the one cluster formed was not significant."),
        ("cluster", [1, -2], [], "declared 0 of 12 points significant; none of the 2 clusters formed was significant."),
        ("cluster", [1], [1], "declared 3 of 12 points significant, in 1 cluster."),
        ("cluster", [1, -2], [1, -2], "declared 6 of 12 points significant, in 2 clusters."),
        ("cluster", [1, -2, 3], [1], "declared 3 of 12 points significant, in 1 of the 3 clusters formed."),
        ("tfce", [1], [1], "declared 3 of 12 points significant, in 1 connected region."),
        ("tfce", [1, 2], [1, 2], "declared 6 of 12 points significant, in 2 connected regions."),
    ],
)
def test_methods_count_clusters_exactly_and_grammatically(kind, ids, significant, expected):
    from famwise.report.methods import _correction
    from famwise.report.results import ReportedCorrection as Correction

    cluster_id = np.zeros(12, dtype=int)
    for k, ident in enumerate(ids):
        cluster_id[3 * k : 3 * k + 3] = ident
    mask = np.isin(cluster_id, significant) & (cluster_id != 0)
    correction = Correction(
        name=kind,
        method=kind,
        p_corrected=np.ones(12),
        mask=mask,
        threshold=float("nan"),
        threshold_kind=kind,
        settings={},
        n_significant=int(mask.sum()),
        cluster_id=cluster_id,
        clusters=[{"id": i} for i in (significant if kind == "tfce" else ids)],
    )
    contrast = type("C", (), {"name": "c"})()
    assert _correction(contrast, correction, {"method": kind}).endswith(expected)
