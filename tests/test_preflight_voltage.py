"""Voltage studies (decomposition.method 'none'): mistakes known before the first job name their spec key."""

from pathlib import Path

import pytest

import famwise.cli
from famwise.cli import main

from conftest import write_tiny_study

TIME_FREQUENCY = """\
decomposition:
  frequencies: {lowest_hz: 6, highest_hz: 14, count: 3, spacing: linear}
  cycles: 3
  time_step_ms: 50
  baseline: {mode: db, window_ms: [-400, -200]}
"""


def _voltage_study(folder: Path, decomposition: str) -> Path:
    """The tiny epochs study (100 Hz, epochs from -600 ms) with ``decomposition`` in place of its own."""
    write_tiny_study(folder, n_subjects=4)
    spec = folder / "study.yaml"
    text = spec.read_text()
    assert TIME_FREQUENCY in text
    spec.write_text(text.replace(TIME_FREQUENCY, decomposition))
    return spec


def _no_snakemake(*args, **kwargs):
    raise AssertionError("Snakemake was started for a spec that is broken")


@pytest.mark.parametrize(
    ("decomposition", "fragment"),
    [
        (
            "decomposition:\n  method: none\n  lowpass_hz: 60\n",
            "decomposition.lowpass_hz: lowpass_hz must lie between 0 and the Nyquist frequency 50 Hz, got 60",
        ),
        (
            "decomposition:\n  method: none\n  lowpass_hz: 30\n  time_step_ms: 20\n",
            "decomposition.lowpass_hz: lowpass_hz 30 Hz is at or above the Nyquist frequency 25 Hz of the 20 ms",
        ),
        (
            "decomposition:\n  method: none\n  time_step_ms: 15\n",
            "decomposition.time_step_ms: time_step_ms must be a positive multiple of the sample interval",
        ),
        (
            "decomposition:\n  method: none\n  baseline: {window_ms: [-900, 0]}\n",
            "decomposition.baseline.window_ms: baseline window -900 to 0 ms lies outside the epoch",
        ),
        (
            "decomposition:\n  method: none\n  time_step_ms: 50\n  baseline: {window_ms: [-40, -10]}\n",
            "decomposition.baseline.window_ms: baseline window -40 to -10 ms holds no output time point",
        ),
        (
            "decomposition:\n  method: none\nanalysis:\n  time_ms: [2000, 3000]\n",
            "analysis.time_ms: no time point lies in [2000.0, 3000.0] ms",
        ),
    ],
)
def test_check_names_the_voltage_key(tmp_path, capsys, monkeypatch, decomposition, fragment):
    spec = _voltage_study(tmp_path, decomposition)
    monkeypatch.setattr(famwise.cli, "run_snakemake", _no_snakemake)
    assert main(["check", str(spec)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and fragment in err[0], err


def test_check_accepts_and_describes_a_voltage_study(tmp_path, capsys):
    spec = _voltage_study(tmp_path, "decomposition:\n  method: none\n  lowpass_hz: 20\n  time_step_ms: 20\n")
    assert main(["check", str(spec)]) == 0
    out = capsys.readouterr().out
    assert "Decomposition: none, condition mean voltage" in out
    assert "from the event (0 ms) to the epoch's end" in out
