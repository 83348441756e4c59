"""A warning a stage raises reaches the console once, the report and (for the baseline) methods.md."""

import json

import pytest

from famwise import stage_warnings
from famwise.cli import main

from conftest import write_tiny_study

EDGE_BASELINE = "window_ms: [-500, -200]"  # the 6 Hz, 3-cycle wavelet is edge-free only from -487 ms on


def test_gather_names_each_message_once_with_its_subjects(tmp_path):
    (tmp_path / "tf").mkdir()
    for subject, messages in {
        "01": ["subject 01: baseline window x"],
        "02": ["subject 02: baseline window x", "subject 02: unit"],
        "03": [],
    }.items():
        (tmp_path / "tf" / f"sub-{subject}.json").write_text(json.dumps({"subject": subject, "warnings": messages}))
    assert stage_warnings.gather(tmp_path, ["01", "02", "03", "04"]) == [
        "baseline window x (subjects 01, 02)",
        "unit (subject 02)",
    ]
    assert stage_warnings.message_of("baseline window x (subjects 01, 02)") == "baseline window x"


@pytest.mark.workflow
def test_baseline_in_the_edge_zone_is_reported_everywhere(tmp_path, capsys):
    spec = write_tiny_study(tmp_path, n_subjects=4, corrections="- method: holm\n")
    spec.write_text(spec.read_text().replace("window_ms: [-400, -200]", EDGE_BASELINE))
    assert main(["check", str(spec)]) == 0
    check_err = capsys.readouterr().err
    assert check_err.count("baseline window -500 to -200 ms reaches into the edge zone") == 1
    assert main(["run", str(spec), "--cores", "2"]) == 0
    run_err = capsys.readouterr().err
    assert run_err.count("reaches into the edge zone") == 1, run_err
    report = (tmp_path / "results" / "report" / "index.html").read_text()
    assert (
        "baseline window -500 to -200 ms reaches into the edge zone" in report and "subjects 01, 02, 03, 04" in report
    )
    methods = (tmp_path / "results" / "report" / "methods.md").read_text()
    assert (
        "Caveat: in subjects 01, 02, 03, 04, the baseline window -500 to -200 ms reached into the edge zone "
        "(cone of influence) at 6 Hz, so the baseline there includes edge-affected values."
    ) in methods
