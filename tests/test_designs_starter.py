"""`famwise init` offers a 2x2 interaction for four conditions and a between-groups F for 3+ groups."""

import numpy as np
from test_preflight_bids import write_bids_study

import famwise.io
from famwise import bids_writing
from famwise.cli import main
from famwise.plan import Plan

LABELS = ("a-hi", "a-lo", "b-hi", "b-lo")


def test_four_conditions_offer_the_interaction(tmp_path):
    rng = np.random.default_rng(0)
    (tmp_path / "data").mkdir()
    times = np.arange(-0.6, 1.0, 0.01)
    for subject in ("01", "02", "03"):
        labels = [label for label in LABELS for _ in range(3)]
        famwise.io.save_epochs(
            tmp_path / "data" / f"sub-{subject}.npz",
            rng.normal(size=(len(labels), 3, times.size)),
            sample_rate_hz=100.0,
            epoch_start_s=float(times[0]),
            channels=["Fz", "Cz", "Pz"],
            event_labels=labels,
        )
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "study.yaml")]) == 0
    text = (tmp_path / "study.yaml").read_text()
    assert "# interaction (a-hi - a-lo) - (b-hi - b-lo)" in text
    uncommented = text.replace("  # - name: interaction", "  - name: interaction").replace("  #   ", "    ")
    (tmp_path / "study.yaml").write_text(uncommented)
    contrast = Plan.from_spec(tmp_path / "study.yaml").contrast("interaction")
    assert contrast.test == "weighted" and contrast.weights == [1.0, -1.0, -1.0, 1.0]
    assert contrast.conditions == list(LABELS)


def test_three_groups_in_participants_offer_the_between_groups_f(tmp_path):
    write_bids_study(tmp_path, 6)
    (tmp_path / "study.yaml").unlink()
    groups = ["north", "south", "east"] * 2
    bids_writing.write_participants(
        tmp_path / "data", [{"participant_id": f"sub-{k:02d}", "group": g} for k, g in enumerate(groups, 1)]
    )
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "study.yaml")]) == 0
    plan = Plan.from_spec(tmp_path / "study.yaml")
    contrast = plan.contrast("high-by-group")
    assert contrast.test == "between-groups" and contrast.groups == ["east", "north", "south"]
    assert plan.contrast_settings("high-by-group").groups == (1, 2, 0, 1, 2, 0)
