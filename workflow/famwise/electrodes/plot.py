"""Drawing a channel graph on a head outline."""

import numpy as np
from matplotlib.patches import Circle, Ellipse, Polygon

from famwise.electrodes.graph import ChannelGraph, azimuthal_projection
from famwise.electrodes.positions import Positions

OUTLINE = "#4d4d4d"
SCALP = "#f5f2eb"
EDGE = "#8797a8"
NODE = "#ffffff"
ISOLATED = "#d9822b"


def plot_graph(graph: ChannelGraph, positions: Positions, ax) -> None:
    """Draw the graph on a head seen from above (nose up, left on the left).

    The positions are placed by the azimuthal equidistant projection from the
    vertex; the head outline is drawn at the level of the Fpz-T7-Oz-T8
    circumference (90 degrees from the vertex), or just outside the lowest
    electrode when some lie lower. Channels without neighbors are filled in
    orange.

    Parameters
    ----------
    graph : ChannelGraph
    positions : Positions
        Positions of exactly ``graph.channels``, in that order (mm).
    ax : matplotlib.axes.Axes
        Axes to draw into; its aspect is set to equal and its frame hidden.
    """
    if positions.names != graph.channels:
        raise ValueError("positions must list exactly the graph's channels, in the same order")
    flat = azimuthal_projection(positions.xyz)
    radius = max(np.pi / 2, 1.06 * float(np.hypot(flat[:, 0], flat[:, 1]).max(initial=0.0)))
    for side in (-1, 1):
        ax.add_patch(
            Ellipse(
                (side * radius, 0),
                0.12 * radius,
                0.32 * radius,
                facecolor=SCALP,
                edgecolor=OUTLINE,
                linewidth=1.2,
                zorder=0,
            )
        )
    ax.add_patch(
        Polygon(
            [(-0.1 * radius, 0.99 * radius), (0, 1.12 * radius), (0.1 * radius, 0.99 * radius)],
            closed=True,
            facecolor=SCALP,
            edgecolor=OUTLINE,
            linewidth=1.2,
            zorder=0,
        )
    )
    ax.add_patch(Circle((0, 0), radius, facecolor=SCALP, edgecolor=OUTLINE, linewidth=1.2, zorder=1))
    index = {name: i for i, name in enumerate(graph.channels)}
    for a, b in graph.edges():
        (x0, y0), (x1, y1) = flat[index[a]], flat[index[b]]
        ax.plot([x0, x1], [y0, y1], color=EDGE, linewidth=0.9, solid_capstyle="round", zorder=2)
    colours = [ISOLATED if d == 0 else NODE for d in graph.degrees]
    ax.scatter(flat[:, 0], flat[:, 1], s=22, c=colours, edgecolors=OUTLINE, linewidths=0.8, zorder=3)
    size = 7 if len(graph.channels) <= 64 else 5
    for name, (x, y) in zip(graph.channels, flat):
        ax.annotate(
            name,
            (x, y),
            xytext=(0, 4),
            textcoords="offset points",
            ha="center",
            va="bottom",
            fontsize=size,
            color="#222222",
            zorder=4,
        )
    ax.set_xlim(-1.2 * radius, 1.2 * radius)
    ax.set_ylim(-1.1 * radius, 1.2 * radius)
    ax.set_aspect("equal")
    ax.set_axis_off()
