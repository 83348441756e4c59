"""The report's visual style: colour maps built in CIELAB, figure settings, saving.

The diverging map runs from a blue to a red endpoint through a near-white
centre with lightness changing linearly in CIELAB on each side, so equal
steps of the statistic look like equal steps of colour and zero is the
lightest colour. The sequential map (for counts) is a single lightness ramp.
"""

import io
from contextlib import contextmanager
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.colors import ListedColormap  # noqa: E402

from famwise.atomic import write_bytes  # noqa: E402

_WHITE_D65 = np.array([0.95047, 1.0, 1.08883])
_XYZ_TO_RGB = np.array(
    [[3.2404542, -1.5371385, -0.4985314], [-0.9692660, 1.8760108, 0.0415560], [0.0556434, -0.2040259, 1.0572252]]
)


def lab_to_srgb(lab: np.ndarray) -> np.ndarray:
    """Convert CIELAB (D65) colours to sRGB in [0, 1], clipped to the gamut.

    Parameters
    ----------
    lab : ndarray of float, shape (n, 3)
        L* in 0-100, a*, b*.

    Returns
    -------
    ndarray of float, shape (n, 3)

    References
    ----------
    IEC 61966-2-1 (1999), sRGB; CIE 15 (2004), colorimetry.
    """
    lab = np.atleast_2d(np.asarray(lab, dtype=float))
    fy = (lab[:, 0] + 16.0) / 116.0
    f = np.stack([fy + lab[:, 1] / 500.0, fy, fy - lab[:, 2] / 200.0], axis=1)
    delta = 6.0 / 29.0
    xyz = np.where(f > delta, f**3, 3 * delta**2 * (f - 4.0 / 29.0)) * _WHITE_D65
    linear = xyz @ _XYZ_TO_RGB.T
    linear = np.clip(linear, 0.0, 1.0)
    rgb = np.where(linear <= 0.0031308, 12.92 * linear, 1.055 * linear ** (1 / 2.4) - 0.055)
    return np.clip(rgb, 0.0, 1.0)


def _ramp(start: tuple, stop: tuple, n: int) -> np.ndarray:
    weights = np.linspace(0.0, 1.0, n)[:, None]
    return (1 - weights) * np.asarray(start, float) + weights * np.asarray(stop, float)


_COOL = (38.0, 14.0, -52.0)
_CENTRE = (97.0, 0.0, 0.0)
_WARM = (38.0, 56.0, 38.0)

DIVERGING = ListedColormap(
    lab_to_srgb(np.vstack([_ramp(_COOL, _CENTRE, 128), _ramp(_CENTRE, _WARM, 128)])), name="famwise_diverging"
)
"""Diverging map for signed statistics and effects; use with a symmetric range."""

SEQUENTIAL = ListedColormap(lab_to_srgb(_ramp((97.0, 0.0, 4.0), (22.0, 18.0, -42.0), 256)), name="famwise_sequential")
"""Sequential map for counts (light = few, dark = many)."""

ACCENT = "#1b1b1b"
"""Outline colour for significant regions and clusters."""
MUTED = "#8a8a8a"

_RC = {
    "font.size": 8.5,
    "font.family": "DejaVu Sans",
    "axes.titlesize": 9,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 8.5,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.linewidth": 0.7,
    "axes.edgecolor": "#333333",
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "xtick.direction": "out",
    "ytick.direction": "out",
    "figure.dpi": 110,
    "figure.facecolor": "white",
    "savefig.facecolor": "white",
    "savefig.bbox": "tight",
    "svg.fonttype": "none",
    "svg.hashsalt": "famwise",
    "image.interpolation": "nearest",
}


@contextmanager
def figure_style():
    """Context in which report figures are drawn."""
    with plt.rc_context(_RC):
        yield


def symmetric_limit(values: np.ndarray) -> float:
    """Largest finite absolute value (1 when there is none), for a range centred at zero."""
    finite = np.abs(np.asarray(values, dtype=float))
    finite = finite[np.isfinite(finite)]
    limit = float(finite.max()) if finite.size else 0.0
    return limit if limit > 0 else 1.0


def write_atomic(path: Path, data: bytes) -> None:
    """Write bytes to ``path`` atomically."""
    write_bytes(path, data)


def save_figure(figure, folder: Path, stem: str) -> bytes:
    """Save a figure as ``<stem>.png`` and ``<stem>.svg`` and close it.

    Returns
    -------
    bytes
        The PNG, for embedding in the HTML page.
    """
    png = io.BytesIO()
    figure.savefig(png, format="png", dpi=130)
    svg = io.BytesIO()
    figure.savefig(svg, format="svg", metadata={"Date": None})
    plt.close(figure)
    write_atomic(Path(folder) / f"{stem}.png", png.getvalue())
    write_atomic(Path(folder) / f"{stem}.svg", svg.getvalue())
    return png.getvalue()
