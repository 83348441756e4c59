"""The spec's voltage choice (decomposition.method 'none'): defaults and the keys it rejects."""

from pathlib import Path

import numpy as np
import pytest

from famwise.errors import UserError
from famwise.plan import Plan
from famwise.planned_values import region_index
from famwise.spec import load_study

VOLTAGE = """\
version: 1
name: voltage spec test
subjects:
  source: epochs
  path: data/sub-{subject}.npz
conditions:
  high-load: [high]
  low-load: [low]
decomposition:
  method: none
contrasts:
  - name: load
    test: paired
    conditions: [high-load, low-load]
inference:
  corrections:
    - method: holm
"""


def _load(tmp_path: Path, text: str):
    spec = tmp_path / "study.yaml"
    spec.write_text(text)
    return load_study(spec)


def _error(tmp_path: Path, text: str) -> str:
    with pytest.raises(UserError) as caught:
        _load(tmp_path, text)
    return str(caught.value)


def test_voltage_defaults(tmp_path):
    tf = _load(tmp_path, VOLTAGE).study.decomposition
    assert (tf.method, tf.measure, tf.time_step_ms, tf.cycles, tf.lowpass_hz) == ("none", "voltage", None, None, None)
    assert (tf.baseline.mode, tf.baseline.window_ms) == ("subtract", (-200.0, 0.0))


def test_voltage_options_reach_the_decompose_settings(tmp_path):
    text = VOLTAGE.replace(
        "  method: none\n",
        "  method: none\n  lowpass_hz: 30\n  time_step_ms: 8\n  baseline: {window_ms: [-100, 0], pooled: true}\n",
    )
    tf = Plan(_load(tmp_path, text)).decompose_settings().decomposition
    assert (tf.method, tf.lowpass_hz, tf.time_step_ms) == ("none", 30.0, 8.0)
    assert (tf.baseline.mode, tf.baseline.window_ms, tf.baseline.pooled) == ("subtract", (-100.0, 0.0), True)


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        (("  method: none\n", "  method: none\n  cycles: 5\n"), "decomposition.cycles: not used with method 'none'"),
        (
            ("  method: none\n", "  method: none\n  frequencies: {lowest_hz: 4}\n"),
            "decomposition.frequencies: not used with method 'none'",
        ),
        (
            ("  method: none\n", "  method: none\n  baseline: {mode: db}\n"),
            "decomposition.baseline.mode: voltage maps take baseline mode",
        ),
        (
            ("  method: none\n", "  method: morlet\n  lowpass_hz: 30\n"),
            "decomposition.lowpass_hz: only used with method 'none'",
        ),
        (
            ("  method: none\n", "  measure: voltage\n"),
            "decomposition.measure: measure 'voltage' goes with method 'none'",
        ),
        (
            ("  method: none\n", "  method: none\n  measure: power\n"),
            "decomposition.method: measure 'voltage' goes with method 'none'",
        ),
        (("inference:", "analysis:\n  freq_hz: [4, 8]\ninference:"), "analysis.freq_hz: voltage maps"),
        (
            (
                "inference:",
                "planned_regions:\n  - {name: late, channels: [Pz], freq_hz: [4, 8], time_ms: [400, 800]}\ninference:",
            ),
            "planned_regions[0].freq_hz: voltage maps",
        ),
        (
            ("inference:", "power:\n  effect: {source: specified, d: [0.5], freq_hz: [4, 8]}\ninference:"),
            "power.effect.freq_hz: voltage maps",
        ),
    ],
)
def test_voltage_rejects_decomposition_keys(tmp_path, edit, message):
    assert message in _error(tmp_path, VOLTAGE.replace(*edit))


def test_region_without_band_covers_every_frequency(tmp_path):
    text = VOLTAGE.replace("  method: none\n", "  method: morlet\n").replace(
        "inference:", "planned_regions:\n  - {name: theta, channels: [Fz], time_ms: [300, 900]}\ninference:"
    )
    region = Plan(_load(tmp_path, text)).subject_values_settings("load").regions[0]
    assert region.freq_hz is None
    freqs, times = np.array([4.0, 6.0, 8.0]), np.linspace(-0.2, 1.0, 61)
    channels, f, t = region_index(region, 0, ["Fz", "Cz"], freqs, times, np.ones((3, 61), bool))
    assert channels.tolist() == [0] and f.tolist() == [0, 1, 2]
    assert np.allclose(times[t][[0, -1]], [0.3, 0.9])


def test_example_voltage_spec_is_valid_and_packaged():
    root = Path(__file__).parents[1]
    example = root / "example_study" / "voltage.yaml"
    assert load_study(example).study.decomposition.method == "none"
    assert example.read_text() == (root / "workflow" / "famwise" / "data" / "example_voltage.yaml").read_text()
