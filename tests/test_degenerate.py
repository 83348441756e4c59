"""Degenerate points: detection and the message of the observed stage, and what it stores when leaving them out."""

import numpy as np
import pytest

from famwise.degenerate import TOLERANCE, degenerate_points
from famwise.design import ContrastData
from famwise.errors import UserError
from famwise.observed import observed_arrays
from famwise.settings import FormingSettings, ObservedSettings

CHANNELS = ("Fz", "Cz", "Pz")
FREQS = np.array([4.0, 5.0, 6.0, 8.0])
TIMES = np.array([0.0, 0.2, 0.3, 0.48, 0.6])
SHAPE = (3, 4, 5)


def _data(x, test="one-sample", groups=None, covariate=None):
    n = x.shape[0]
    return ContrastData(
        x=x.astype(np.float32),
        test=test,
        subjects=tuple(f"{i:02d}" for i in range(1, n + 1)),
        channels=CHANNELS,
        freqs=FREQS,
        times=TIMES,
        groups=groups,
        covariate=covariate,
    )


def _settings(mode="stop", forming=()):
    return ObservedSettings(
        statistic="t", trim=0.2, equal_var=True, tail="two-sided", forming=forming, degenerate_points=mode
    )


def _maps(n=8, seed=1):
    return np.random.default_rng(seed).normal(size=(n, *SHAPE))


def test_identical_values_stop_with_where_and_why():
    x = _maps()
    x[:, :2, 0:3, 1:4] = 0.7  # Fz, Cz; 4-6 Hz; 200-480 ms identical in every subject
    with pytest.raises(UserError) as error:
        observed_arrays(_data(x.reshape(8, -1)), x.reshape(8, -1), _settings())
    message = str(error.value)
    assert "18 points of 60" in message
    assert "Fz, Cz; 4-6 Hz; 200-480 ms" in message
    assert "values identical in all subjects" in message
    assert "inference.degenerate_points: leave-out" in message
    assert "\n" not in message


def test_nan_in_one_subject_names_the_subject():
    x = _maps()
    x[2, 2, 3, 4] = np.nan
    with pytest.raises(
        UserError, match=r"1 point of 60 .*\(Pz; 8 Hz; 600 ms\); likely cause: NaN or inf in the map of subject 03"
    ):
        observed_arrays(_data(x.reshape(8, -1)), x.reshape(8, -1), _settings())


def test_leave_out_stores_the_map_with_zero_statistic_and_nan_p():
    x = _maps()
    x[:, 1, :, :] = 0.0  # a zeroed channel
    x[4, 0, 0, 0] = np.inf
    flat = x.reshape(8, -1)
    arrays = observed_arrays(_data(flat), flat, _settings("leave-out", (FormingSettings("c", 0.01, None),)))
    expected = np.zeros(SHAPE, bool)
    expected[1] = True
    expected[0, 0, 0] = True
    assert np.array_equal(arrays["left_out"], expected)
    assert np.all(arrays["stat"][expected] == 0) and np.all(np.isnan(arrays["p"][expected]))
    assert np.all(np.isfinite(arrays["stat"])) and np.all(np.isfinite(arrays["p"][~expected]))
    clean = observed_arrays(_data(_maps().reshape(8, -1)), _maps().reshape(8, -1), _settings())
    # the other points keep exactly the statistic they have without the degenerate points
    assert np.array_equal(arrays["stat"][~expected], clean["stat"][~expected])
    assert not clean["left_out"].any()


def test_negligible_variance_rule_and_two_sample_needs_both_groups():
    rng = np.random.default_rng(4)
    x = rng.normal(size=(10, 4)) * 100.0  # largest |value| about 250
    scale = np.abs(x).max()
    x[:, 0] = 5.0 + np.array([1, -1] * 5) * TOLERANCE * scale * 0.5  # sd below 1e-6 x scale
    x[:, 1] = 5.0 + np.array([1, -1] * 5) * TOLERANCE * scale * 2.0  # sd above it
    assert degenerate_points(x, test="one-sample").tolist() == [True, False, False, False]
    groups = np.array([0] * 5 + [1] * 5)
    y = rng.normal(size=(10, 3))
    y[:5, 0] = 1.0  # first group identical, second not: the pooled variance is not zero
    y[:, 1] = np.repeat([1.0, 2.0], 5)  # identical within each group
    assert degenerate_points(y, test="two-sample", groups=groups).tolist() == [False, True, False]


def test_repeated_measures_and_correlation_rules():
    rng = np.random.default_rng(5)
    x = rng.normal(size=(6, 3, 3))
    x[:, :, 0] = rng.normal(size=(6, 1)) + np.array([0.0, 1.0, 2.0])  # subject + condition effects only
    assert degenerate_points(x, test="repeated-measures").tolist() == [True, False, False]
    covariate = rng.normal(size=6)
    y = rng.normal(size=(6, 2))
    y[:, 0] = 2 * covariate + 1  # r = 1: t infinite
    from famwise.stats import compute

    with np.errstate(divide="ignore", invalid="ignore"):
        stat = compute(y, test="correlation", covariate=covariate).stat
    assert degenerate_points(y, test="correlation", stat=stat).tolist() == [True, False]


def test_observed_job_stops_with_one_line_naming_the_contrast(tmp_path, capsys):
    from famwise.jobs import main
    from famwise.settings_codec import to_json

    x = _maps()
    x[:, 0, 3, :] = 1.5
    folder = tmp_path / "contrasts" / "gamma-burst"
    folder.mkdir(parents=True)
    _data(x.reshape(8, -1)).save(folder / "subjects.npz")
    status = main(
        [
            "observed",
            "--settings",
            to_json(_settings()),
            "--subjects",
            str(folder / "subjects.npz"),
            "--out",
            str(folder / "observed.npz"),
        ]
    )
    lines = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert status == 2 and not (folder / "observed.npz").exists()
    assert len(lines) == 1
    assert lines[0].startswith("famwise: error: contrast gamma-burst: observed statistics: 5 points of 60")
    assert "(Fz; 8 Hz; 0-600 ms); likely cause: values identical in all subjects" in lines[0]
