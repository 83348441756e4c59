"""Electrode positions and channel neighbor graphs.

Positions come from the 10-20 / 10-10 tables (computed from the
systems' 10 %/20 % rule on a spherical head by ``scripts/make_positions.py``)
or from a user's BIDS ``_electrodes.tsv`` or plain TSV. A neighbor graph over
the analysed channels is built by Delaunay triangulation of the projected
positions, by a distance threshold, or from an edge-list file.
"""

from famwise.electrodes.graph import (
    ChannelGraph,
    azimuthal_projection,
    channel_graph,
    graph_summary,
    load_graph,
    neighbor_graph,
    save_graph,
)
from famwise.electrodes.plot import plot_graph
from famwise.electrodes.positions import Positions, match_channels, read_positions, system_positions

__all__ = [
    "ChannelGraph",
    "Positions",
    "azimuthal_projection",
    "channel_graph",
    "graph_summary",
    "load_graph",
    "match_channels",
    "neighbor_graph",
    "plot_graph",
    "read_positions",
    "save_graph",
    "system_positions",
]
