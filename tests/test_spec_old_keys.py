"""A spec written with a key or value of earlier versions fails with one line naming the new key."""

import subprocess
import sys

import pytest

from famwise.errors import UserError
from famwise.spec import load_study
from famwise.spec.old_keys import RENAMED_KEYS

BASE = """\
version: 1
name: old keys
subjects:
  source: epochs
  path: data/sub-{subject}.npz
conditions:
  high-load: [high]
  low-load: [low]
contrasts:
  - name: load
    test: paired
    conditions: [high-load, low-load]
inference:
  corrections:
    - method: cluster
      min_neighbor_channels: 2
"""


def _error(tmp_path, text):
    spec = tmp_path / "study.yaml"
    spec.write_text(text)
    with pytest.raises(UserError) as caught:
        load_study(spec)
    return str(caught.value)


@pytest.mark.parametrize(("section", "expected"), [
    ("timefreq:\n  cycles: 5\n", "study.yaml:16 timefreq: renamed; write 'decomposition' instead of 'timefreq'"),
    ("decomposition:\n  method: multitaper\n  time_bandwidth: 2\n",
     "study.yaml:18 decomposition.time_bandwidth: renamed; write 'nw' instead of 'time_bandwidth'"),
    ("decomposition:\n  method: multitaper\n  window_ms: 400\n",
     "study.yaml:18 decomposition.window_ms: renamed; write 'taper_length_ms' instead of 'window_ms'"),
    ("decomposition:\n  freqs_hz: {count: 3}\n", "study.yaml:17 decomposition.freqs_hz: renamed; write 'frequencies'"),
    ("decomposition:\n  frequencies: {start_hz: 3}\n", "study.yaml:17 decomposition.frequencies.start_hz: renamed; write 'lowest_hz'"),
    ("decomposition:\n  baseline:\n    single_trial: true\n", "study.yaml:18 decomposition.baseline.single_trial: renamed; write 'single_epoch'"),
    ("channels:\n  positions: standard-10-20\n", "study.yaml:17 channels.positions: 'standard-10-20' is now written '10-20'"),
])
def test_old_key_names_the_new_one(tmp_path, section, expected):
    text = BASE.replace("      min_neighbor_channels: 2\n", "") + section
    assert _error(tmp_path, text).startswith(expected)


def test_old_key_in_a_list_item_and_old_source_value(tmp_path):
    assert _error(tmp_path, BASE) == ("study.yaml:16 inference.corrections[0].min_neighbor_channels: renamed; "
                                      "write 'min_supra_neighbors' instead of 'min_neighbor_channels'")
    old_source = BASE.replace("source: epochs", "source: timefreq").replace("      min_neighbor_channels: 2\n", "")
    assert _error(tmp_path, old_source) == "study.yaml:4 subjects.source: 'timefreq' is now written 'maps'"


def test_every_new_key_exists_in_the_models():
    from famwise.spec.reference import reference_markdown
    reference = reference_markdown()
    for path, new in RENAMED_KEYS.items():
        dotted = ".".join(p for p in path[:-1] if p != "*")
        assert f"`{dotted + '.' if dotted else ''}{new}`" in reference or f"`{new}`" in reference, (path, new)


def test_check_exits_2_with_one_line(tmp_path):
    (tmp_path / "study.yaml").write_text(BASE)
    result = subprocess.run([sys.executable, "-m", "famwise.cli", "check", str(tmp_path / "study.yaml")],
                            capture_output=True, text=True)
    assert result.returncode == 2 and result.stderr.strip().splitlines() == [
        "famwise: error: study.yaml:16 inference.corrections[0].min_neighbor_channels: renamed; "
        "write 'min_supra_neighbors' instead of 'min_neighbor_channels'"]
