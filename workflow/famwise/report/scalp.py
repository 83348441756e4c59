"""Scalp maps: 2-D projection of electrode positions and interpolated topographies."""

import numpy as np
from matplotlib.patches import Circle, Polygon
from scipy.interpolate import RBFInterpolator

from famwise.electrodes import azimuthal_projection
from famwise.figure_style import ACCENT, DIVERGING


def project(xyz: np.ndarray) -> np.ndarray:
    """Project electrode positions onto the picture of the head seen from above.

    The azimuthal equidistant projection from the vertex of
    :func:`famwise.electrodes.azimuthal_projection`, scaled so that the circle
    90 degrees from the vertex (through Fpz, T7, Oz, T8) has radius 1.

    Parameters
    ----------
    xyz : ndarray of float, shape (C, 3)
        Positions in mm (x right, y anterior, z up, origin at the head centre).

    Returns
    -------
    ndarray of float, shape (C, 2)
    """
    return azimuthal_projection(np.asarray(xyz, dtype=float)) / (np.pi / 2)


def draw_head(ax, *, radius: float = 1.0) -> None:
    """Draw a head outline (circle, nose wedge, ear marks) of the given radius."""
    ax.add_patch(Circle((0, 0), radius, fill=False, lw=1.0, color=ACCENT))
    ax.add_patch(
        Polygon(
            [[-0.09 * radius, 0.995 * radius], [0, 1.1 * radius], [0.09 * radius, 0.995 * radius]],
            closed=False,
            fill=False,
            lw=1.0,
            color=ACCENT,
        )
    )
    for side in (-1, 1):
        ax.plot(
            side * radius * np.array([1.0, 1.05, 1.05, 1.0]),
            radius * np.array([0.12, 0.08, -0.12, -0.16]),
            lw=1.0,
            color=ACCENT,
        )
    ax.set_aspect("equal")
    ax.set_xlim(-1.2 * radius, 1.2 * radius)
    ax.set_ylim(-1.15 * radius, 1.2 * radius)
    ax.axis("off")


def topography(
    ax, values: np.ndarray, flat: np.ndarray, *, limit: float, marked: np.ndarray | None = None, resolution: int = 96
):
    """Interpolated scalp map of one value per channel on a head outline.

    Parameters
    ----------
    ax : matplotlib Axes
    values : ndarray of float, shape (C,)
    flat : ndarray of float, shape (C, 2)
        Projected positions from :func:`project`.
    limit : float
        Colour range is [-limit, limit], centred at zero.
    marked : ndarray of bool, shape (C,), optional
        Channels drawn as filled accent dots (e.g. a cluster's channels); the
        others are small open rings.
    resolution : int
        Grid points per side.

    Returns
    -------
    matplotlib image (for a colour bar)
    """
    values = np.asarray(values, dtype=float)
    extent = max(1.0, float(np.hypot(flat[:, 0], flat[:, 1]).max()) * 1.02)
    axis = np.linspace(-extent, extent, resolution)
    gx, gy = np.meshgrid(axis, axis)
    inside = np.hypot(gx, gy) <= extent
    grid = np.full(gx.shape, np.nan)
    finite = np.isfinite(values)
    if finite.sum() >= 4:
        interpolator = RBFInterpolator(flat[finite], values[finite], kernel="thin_plate_spline", smoothing=1e-6)
        grid[inside] = interpolator(np.column_stack([gx[inside], gy[inside]]))
    image = ax.imshow(
        grid,
        origin="lower",
        extent=(-extent, extent, -extent, extent),
        cmap=DIVERGING,
        vmin=-limit,
        vmax=limit,
        interpolation="bilinear",
    )
    if finite.sum() >= 4 and np.nanmax(grid) > np.nanmin(grid):
        ax.contour(gx, gy, grid, levels=np.linspace(-limit, limit, 9), colors="#00000033", linewidths=0.5)
    marked = np.zeros(len(flat), bool) if marked is None else np.asarray(marked, bool)
    ax.scatter(flat[~marked, 0], flat[~marked, 1], s=9, facecolor="none", edgecolor="#555555", lw=0.6, zorder=3)
    if marked.any():
        ax.scatter(flat[marked, 0], flat[marked, 1], s=20, c=ACCENT, lw=0, zorder=4)
    draw_head(ax)
    ax.set_xlim(-1.2 * extent, 1.2 * extent)
    ax.set_ylim(-1.15 * extent, 1.2 * extent)
    return image
