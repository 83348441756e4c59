"""Stage settings: built once by the plan, carried as JSON text, read back as the same type; derived values stored once."""

import numpy as np
import pytest
import scipy.stats

from famwise.design import ContrastData
from famwise.observed import observed_arrays, stored_forming_threshold
from famwise.plan import Plan
from famwise.settings import FormingSettings, ObservedSettings
from famwise.settings_codec import from_json, to_json

from conftest import write_tiny_study

CORRECTIONS = """\
- method: holm
- method: max-stat
  step_down: true
- method: cluster
- method: cluster
  name: by-stat
  forming_stat: 2.5
- method: tfce
"""


def test_every_stage_settings_survive_their_json_text(tmp_path):
    plan = Plan.from_spec(write_tiny_study(tmp_path, corrections=CORRECTIONS))
    built = [
        plan.decompose_settings(),
        plan.subjects_table_settings(),
        plan.graph_settings(),
        plan.contrast_settings("high-vs-low"),
        plan.observed_settings(),
        plan.null_settings(),
        plan.study_record_settings(),
        plan.report_settings(),
        *(plan.correction_settings(c.label) for c in plan.study.inference.corrections),
    ]
    for settings in built:
        text = to_json(settings)
        again = from_json(type(settings), text)
        assert (
            again == settings and to_json(again) == text
        )  # deterministic text: Snakemake reruns only on a real change


def test_forming_p_keeps_its_name_and_the_default_reaches_the_observed_stage(tmp_path):
    plan = Plan.from_spec(write_tiny_study(tmp_path, corrections=CORRECTIONS))
    assert plan.observed_settings().forming == (
        FormingSettings("cluster", 0.01, None),
        FormingSettings("by-stat", None, 2.5),
    )
    assert plan.correction_settings("cluster").correction.forming_p == 0.01


@pytest.mark.parametrize("tail", ["two-sided", "greater"])
def test_observed_stage_stores_the_forming_threshold_once(tail):
    rng = np.random.default_rng(3)
    n, shape = 9, (2, 2, 3)
    data = ContrastData(
        x=rng.normal(size=(n, 12)).astype(np.float32),
        test="one-sample",
        subjects=tuple(f"{i}" for i in range(n)),
        channels=("a", "b"),
        freqs=np.array([4.0, 8.0]),
        times=np.array([0.0, 0.1, 0.2]),
        groups=None,
        covariate=None,
    )
    settings = ObservedSettings(
        statistic="t",
        trim=0.2,
        equal_var=True,
        tail=tail,
        forming=(FormingSettings("c", 0.01, None), FormingSettings("s", None, 2.5)),
    )
    arrays = observed_arrays(data, data.x, settings)
    per_tail = 0.005 if tail == "two-sided" else 0.01
    # scipy.stats.t.isf: the t value exceeded with probability forming_p per tail
    assert stored_forming_threshold(arrays, "c") == pytest.approx(scipy.stats.t.isf(per_tail, n - 1), rel=1e-12)
    assert stored_forming_threshold(arrays, "s") == 2.5
    assert arrays["stat"].shape == shape and str(arrays["tail"]) == tail
