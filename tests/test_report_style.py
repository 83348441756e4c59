"""Colour maps, scalp projection and topography of the report."""

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

from famwise.electrodes import match_channels, system_positions  # noqa: E402
from famwise.figure_style import DIVERGING, SEQUENTIAL, lab_to_srgb, symmetric_limit  # noqa: E402
from famwise.report.methods import fmt, method_kind  # noqa: E402
from famwise.report.scalp import project, topography  # noqa: E402


def _lightness(rgb: np.ndarray) -> np.ndarray:
    """CIE 1976 L* of sRGB colours (IEC 61966-2-1 decoding; from memory)."""
    linear = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    y = linear @ np.array([0.2126729, 0.7151522, 0.0721750])
    return np.where(y > (6 / 29) ** 3, 116 * np.cbrt(y) - 16, y * (29 / 3) ** 3)


def test_lab_to_srgb_known_colours():
    # L* = 50 neutral grey is sRGB 119/255 = 0.4667 (common colour-conversion tables; from memory)
    assert lab_to_srgb([[50.0, 0.0, 0.0]])[0] == pytest.approx([0.4663] * 3, abs=2e-3)
    assert lab_to_srgb([[100.0, 0.0, 0.0]])[0] == pytest.approx([1.0] * 3, abs=1e-6)
    assert lab_to_srgb([[0.0, 0.0, 0.0]])[0] == pytest.approx([0.0] * 3, abs=1e-9)


def test_diverging_map_is_lightest_at_zero_and_symmetric_in_lightness():
    lightness = _lightness(DIVERGING(np.linspace(0, 1, 256))[:, :3])
    assert np.all(np.diff(lightness[:128]) > 0) and np.all(np.diff(lightness[128:]) < 0)
    assert lightness[:128] == pytest.approx(lightness[::-1][:128], abs=1.0)
    # equal steps of the statistic give equal steps of lightness (perceptually uniform ramp)
    steps = np.diff(lightness[:128])
    assert steps.max() / steps.min() < 1.3
    assert np.all(np.diff(_lightness(SEQUENTIAL(np.linspace(0, 1, 256))[:, :3])) < 0)


def test_projection_puts_the_vertex_in_the_middle_and_the_nose_up():
    # Fpz, T7, Oz, T8 lie 90 degrees from Cz in the 10-10 system (Jasper 1958; from memory)
    positions = match_channels(system_positions("10-10"), ["Cz", "Fpz", "T7", "Oz", "T8"])
    flat = project(positions.xyz)
    assert flat[0] == pytest.approx([0, 0], abs=1e-9)
    assert flat[1:] == pytest.approx(np.array([[0, 1], [-1, 0], [0, -1], [1, 0]]), abs=1e-6)


def test_topography_follows_the_values_left_to_right():
    positions = match_channels(
        system_positions("10-10"), ["F3", "Fz", "F4", "C3", "Cz", "C4", "P3", "Pz", "P4", "T7", "T8"]
    )
    flat = project(positions.xyz)
    figure, ax = plt.subplots()
    image = topography(ax, flat[:, 0], flat, limit=1.0, marked=np.arange(11) < 3)
    grid = image.get_array()
    plt.close(figure)
    middle = grid.shape[0] // 2
    row = np.asarray(grid[middle])
    left, right = row[: len(row) // 3], row[-len(row) // 3 :]
    assert np.nanmean(left) < -0.3 and np.nanmean(right) > 0.3
    assert np.ma.is_masked(grid[0, 0]) or np.isnan(grid[0, 0])  # outside the head


def test_method_names_of_the_spec_map_to_their_references():
    kinds = {
        m: method_kind(m)
        for m in ("bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by", "max-stat", "cluster", "tfce")
    }
    assert kinds == {
        "bonferroni": "bonferroni",
        "sidak": "sidak",
        "holm": "holm",
        "hochberg": "hochberg",
        "fdr-bh": "bh",
        "fdr-by": "by",
        "max-stat": "maxstat",
        "cluster": "cluster",
        "tfce": "tfce",
    }


def test_number_format_and_symmetric_limit():
    assert [fmt(999), fmt(0.0012784), fmt(150.0), fmt(-0.5), fmt(True)] == ["999", "0.001278", "150", "-0.5", "True"]
    assert symmetric_limit(np.array([-3.0, 2.0, np.nan])) == 3.0
    assert symmetric_limit(np.zeros(3)) == 1.0


@pytest.mark.parametrize("observed", [0.5, 3.0, 5.9])
def test_null_histogram_legend_covers_no_data(observed):
    from types import SimpleNamespace

    from famwise.report.figures import null_figure
    from famwise.report.results import ReportedCorrection as Correction

    null = np.random.default_rng(0).gamma(4.0, 0.5, 1000)
    stat = np.array([[[observed, -observed / 2]]])
    correction = Correction(
        name="max-stat",
        method="max-stat",
        p_corrected=np.ones(stat.shape),
        mask=np.zeros(stat.shape, bool),
        threshold=float(np.quantile(null, 0.95)),
        threshold_kind="stat",
        settings={},
        n_significant=0,
        null=null,
    )
    contrast = SimpleNamespace(stat=stat, statistic="t", test="paired", name="c")
    figure = null_figure(correction, contrast)
    figure.canvas.draw()
    ax = figure.axes[0]
    legend = ax.get_legend().get_window_extent()
    plot = ax.get_window_extent()
    assert legend.x0 >= plot.x1 or legend.y1 <= plot.y0  # beside or below the axes, never on the bars or lines
    plt.close(figure)


@pytest.mark.parametrize(
    ("freqs", "expected"),
    [
        (np.geomspace(4.0, 30.0, 12), [4, 8, 16]),  # the odd bins 5.77, 8.32, ... are never ticks
        (np.geomspace(2.0, 45.0, 20), [2, 4, 8, 16, 32]),
        (np.geomspace(6.0, 14.0, 5), [6, 8, 12]),
        (np.linspace(6.0, 14.0, 3), [6, 8, 10, 12, 14]),
        (np.linspace(4.0, 40.0, 10), [10, 20, 30, 40]),
    ],
)
def test_frequency_ticks_fall_on_round_frequencies(freqs, expected):
    from famwise.report.figures import round_frequency_ticks

    values, rows = round_frequency_ticks(freqs)
    assert values.tolist() == expected
    # each tick sits where its frequency lies on the grid's own scale (log for geomspace)
    log = freqs[2] - freqs[1] != pytest.approx(freqs[1] - freqs[0])
    back = np.interp(rows, np.arange(freqs.size), np.log(freqs) if log else freqs)
    assert (np.exp(back) if log else back) == pytest.approx(expected)


def test_topography_marks_members_with_filled_dots_and_the_rest_with_open_rings():
    positions = match_channels(system_positions("10-10"), ["F3", "Fz", "F4", "C3", "Cz", "C4"])
    flat = project(positions.xyz)
    figure, ax = plt.subplots()
    topography(ax, flat[:, 0], flat, limit=1.0, marked=np.arange(6) < 2)
    rings, dots = ax.collections[-2:]
    assert len(rings.get_offsets()) == 4 and len(dots.get_offsets()) == 2
    assert rings.get_facecolor().size == 0 or rings.get_facecolor()[0][3] == 0  # open
    assert dots.get_facecolor()[0][3] == 1 and tuple(dots.get_facecolor()[0][:3]) != (
        1.0,
        1.0,
        1.0,
    )  # filled, not white
    plt.close(figure)
