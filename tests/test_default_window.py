"""The default analysis window starts at the event; a window given is used as given, with a note when it starts before 0 ms."""

import numpy as np
import pytest

from famwise.cli import main
from famwise.design import _time_index
from famwise.errors import UserError
from famwise.plan import Plan
from famwise.summary import describe_plan, window_note

from conftest import write_tiny_subject

TIMES = np.round(np.arange(-0.5, 1.0001, 0.05), 3)  # s


def _valid(first_s, last_s):
    """Two frequencies, edge-free between first_s and last_s (the lower frequency narrower)."""
    valid = np.zeros((2, TIMES.size), bool)
    valid[0] = (TIMES >= first_s - 1e-9) & (TIMES <= last_s + 1e-9)
    valid[1] = (TIMES >= first_s - 0.1 - 1e-9) & (TIMES <= last_s + 0.1 + 1e-9)
    return valid


def test_default_window_runs_from_the_event_to_the_end_of_the_edge_free_data():
    index = _time_index(TIMES, _valid(-0.3, 0.8), np.array([4.0, 8.0]), None)
    assert TIMES[index[0]] == 0.0 and TIMES[index[-1]] == 0.8
    assert np.array_equal(index, np.arange(index[0], index[-1] + 1))


def test_default_window_without_edge_free_time_after_the_event_is_an_error():
    with pytest.raises(UserError, match=r"no time point at or after the event \(0 ms\) is free of edge effects"):
        _time_index(TIMES, _valid(-0.45, -0.1), np.array([4.0, 8.0]), None)


def test_a_given_window_is_used_as_given_even_before_the_event():
    index = _time_index(TIMES, _valid(-0.3, 0.8), np.array([4.0, 8.0]), [-200.0, 600.0])
    assert TIMES[index[0]] == -0.2 and TIMES[index[-1]] == 0.6


def test_check_notes_the_cost_of_a_window_starting_before_the_event(tmp_path):
    rng = np.random.default_rng(0)
    (tmp_path / "data").mkdir()
    for subject in ("01", "02", "03"):
        write_tiny_subject(tmp_path / "data" / f"sub-{subject}.npz", rng, sample_rate_hz=100.0)
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "study.yaml")]) == 0
    text = (tmp_path / "study.yaml").read_text()
    assert "time_ms: null          # null: from the event (0 ms) to the end of the edge-free data" in text
    assert "make every correction stricter" in text
    summary = describe_plan(Plan.from_spec(tmp_path / "study.yaml"))
    assert "time from the event (0 ms) to the end of the edge-free data (the baseline is not tested)" in summary
    assert "Note: analysis.time_ms" not in summary
    (tmp_path / "study.yaml").write_text(text.replace("time_ms: null ", "time_ms: [-200, 500]"))
    summary = describe_plan(Plan.from_spec(tmp_path / "study.yaml"))
    note = window_note((-200.0, 500.0))
    assert note in summary.splitlines()
    assert "starts at -200 ms, before the event" in note and "make it stricter" in note
    assert window_note((0.0, 500.0)) is None and window_note(None) is None
