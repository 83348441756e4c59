"""Channel neighbor graphs: triangulation, distance threshold or an edge list."""

import warnings
from dataclasses import dataclass
from itertools import combinations
from pathlib import Path

import numpy as np
from scipy.spatial import ConvexHull, Delaunay, QhullError
from scipy.spatial.distance import cdist

from famwise.atomic import save_npz
from famwise.electrodes.positions import (
    SYSTEMS,
    Positions,
    channel_key,
    match_channels,
    read_positions,
    read_tsv,
    system_positions,
)
from famwise.errors import FamwiseWarning, UserError

METHODS = ("delaunay", "distance", "edges")
RIM_FACTOR = 2.0  # outline edges longer than this x the median edge are cut (Delaunay without max_distance_mm)
FILE_FORMAT = "famwise-channel-graph-1"


@dataclass(frozen=True)
class ChannelGraph:
    """Undirected neighbor graph over channels in compressed sparse row form.

    Attributes
    ----------
    channels : tuple of str, length C
        Channel names; node i is ``channels[i]``.
    indptr : ndarray of int32, shape (C + 1,)
        Neighbors of node i are ``indices[indptr[i]:indptr[i + 1]]``.
    indices : ndarray of int32, shape (2 * n_edges,)
        Neighbor indices, sorted within each node; symmetric, no self loops.
    method : str
        How the graph was built (``"delaunay"``, ``"distance"``, ``"edges"``).
    """

    channels: tuple[str, ...]
    indptr: np.ndarray
    indices: np.ndarray
    method: str

    def __post_init__(self):
        channels = tuple(str(c) for c in self.channels)
        n = len(channels)
        indptr = np.ascontiguousarray(self.indptr, dtype=np.int32)
        indices = np.ascontiguousarray(self.indices, dtype=np.int32)
        if indptr.shape != (n + 1,) or indptr[0] != 0 or np.any(np.diff(indptr) < 0) or indptr[-1] != indices.size:
            raise ValueError(f"indptr must be non-decreasing, shape ({n + 1},), from 0 to len(indices)")
        if indices.size and (indices.min() < 0 or indices.max() >= n):
            raise ValueError("indices must lie in [0, C)")
        dense = _dense(indptr, indices, n)
        rows = np.repeat(np.arange(n), np.diff(indptr))
        if (
            np.any(dense.diagonal())
            or not np.array_equal(dense, dense.T)
            or dense.sum() != indices.size
            or np.any(np.diff(indices)[np.diff(rows) == 0] <= 0)
        ):
            raise ValueError("the graph must be symmetric, without self loops, with sorted unique neighbors")
        indptr.setflags(write=False)
        indices.setflags(write=False)
        object.__setattr__(self, "channels", channels)
        object.__setattr__(self, "indptr", indptr)
        object.__setattr__(self, "indices", indices)

    @property
    def degrees(self) -> np.ndarray:
        """Number of neighbors of each channel, int, shape (C,)."""
        return np.diff(self.indptr)

    @property
    def isolated(self) -> tuple[str, ...]:
        """Channels without neighbors."""
        return tuple(c for c, d in zip(self.channels, self.degrees) if d == 0)

    @property
    def n_edges(self) -> int:
        """Number of undirected edges."""
        return int(self.indices.size // 2)

    def neighbors(self, channel: str) -> tuple[str, ...]:
        """Names of the neighbors of ``channel`` (matched ignoring case)."""
        keys = [channel_key(c) for c in self.channels]
        if channel_key(channel) not in keys:
            raise UserError(f"channel {channel!r} is not in the graph")
        i = keys.index(channel_key(channel))
        return tuple(self.channels[j] for j in self.indices[self.indptr[i] : self.indptr[i + 1]])

    def edges(self) -> list[tuple[str, str]]:
        """Undirected edges as name pairs ``(a, b)`` with a before b in ``channels``."""
        rows = np.repeat(np.arange(len(self.channels)), self.degrees)
        keep = rows < self.indices
        return [(self.channels[i], self.channels[j]) for i, j in zip(rows[keep], self.indices[keep])]


def _dense(indptr, indices, n):
    dense = np.zeros((n, n), dtype=np.int64)
    np.add.at(dense, (np.repeat(np.arange(n), np.diff(indptr)), indices), 1)
    return dense


def graph_from_pairs(channels, first, second, method: str) -> ChannelGraph:
    """Graph from index pairs (either order, repeats allowed, no self loops)."""
    n = len(channels)
    adjacency = np.zeros((n, n), dtype=bool)
    adjacency[np.asarray(first, dtype=int), np.asarray(second, dtype=int)] = True
    adjacency |= adjacency.T
    np.fill_diagonal(adjacency, False)
    indptr = np.concatenate([[0], np.cumsum(adjacency.sum(axis=1))])
    return ChannelGraph(tuple(channels), indptr, np.nonzero(adjacency)[1], method)


def azimuthal_projection(xyz: np.ndarray) -> np.ndarray:
    """Azimuthal equidistant projection from the vertex (+z axis of the head frame).

    Parameters
    ----------
    xyz : ndarray, shape (n, 3)
        Positions in a frame with z up (origin inside the head).

    Returns
    -------
    ndarray, shape (n, 2)
        ``theta * (cos(phi), sin(phi))`` with theta the angle from +z (radians)
        and phi the azimuth in the x-y plane: +x right, +y anterior (nose up).
    """
    xyz = np.asarray(xyz, dtype=float)
    theta = np.arctan2(np.hypot(xyz[:, 0], xyz[:, 1]), xyz[:, 2])
    phi = np.arctan2(xyz[:, 1], xyz[:, 0])
    return np.column_stack([theta * np.cos(phi), theta * np.sin(phi)])


def neighbor_graph(
    positions: Positions, *, method: str = "delaunay", max_distance_mm: float | None = None, edges_file=None
) -> ChannelGraph:
    """Neighbor graph over the channels of ``positions``.

    Parameters
    ----------
    positions : Positions
        The analysed channels (see ``match_channels``), xyz in mm.
    method : {"delaunay", "distance", "edges"}
        ``"delaunay"``: edges of the Delaunay triangulation of the azimuthal
        equidistant projection from the vertex (+z axis through the origin of
        the head frame); where four or more channels lie on one empty circle
        (regular grids), all of them are joined, so the graph does not depend
        on rounding; with ``max_distance_mm``, edges longer than that (3-D, mm)
        are dropped; without it, edges on the outline of the projection
        (the rim of the cap) longer than ``RIM_FACTOR`` times the median edge
        are dropped, as they join channels across the cap's open border,
        unless a channel would lose its last neighbor. ``"distance"``: channels at most ``max_distance_mm``
        apart (3-D Euclidean, mm). ``"edges"``: the pairs listed in
        ``edges_file``, a TSV with the columns ``channel_a``, ``channel_b``.
    max_distance_mm : float, optional
        Distance threshold in mm (required for ``"distance"``).
    edges_file : str or Path, optional
        Edge list (required for ``"edges"``).

    Returns
    -------
    ChannelGraph
        Over exactly ``positions.names``, in that order. Isolated channels
        emit a ``FamwiseWarning``: they can only form single-channel clusters.

    References
    ----------
    Delaunay B (1934). Bull Acad Sci URSS 6:793-800.
    """
    _check_graph_args(positions, method, max_distance_mm, edges_file)
    if method == "delaunay":
        first, second = _delaunay_pairs(positions)
        length = np.linalg.norm(positions.xyz[first] - positions.xyz[second], axis=1)
        if max_distance_mm is not None:
            keep = length <= max_distance_mm
        else:
            keep = ~_long_rim_edges(first, second, length, positions)
        first, second = first[keep], second[keep]
    elif method == "distance":
        first, second = np.nonzero(cdist(positions.xyz, positions.xyz) <= max_distance_mm)
    else:
        first, second = _edge_file_pairs(Path(edges_file), positions.names)
    graph = graph_from_pairs(positions.names, first, second, method)
    if graph.isolated:
        warnings.warn(
            f"channel graph ({method}): {len(graph.isolated)} channel(s) without neighbors: "
            f"{', '.join(graph.isolated)}; they can only form single-channel clusters",
            FamwiseWarning,
            stacklevel=2,
        )
    return graph


def channel_graph(
    channels, *, positions="10-10", method: str = "delaunay", max_distance_mm: float | None = None, edges_file=None
) -> tuple[ChannelGraph, Positions]:
    """Positions of the analysed channels and their neighbor graph, in one call.

    Parameters
    ----------
    channels : sequence of str, length C
        Analysed channel names.
    positions : {"10-10", "10-20"} or str or Path
        An electrode system ("10-10", "10-20") or a position file (see ``read_positions``).
    method, max_distance_mm, edges_file
        As in ``neighbor_graph``.

    Returns
    -------
    graph : ChannelGraph
        Over exactly ``channels``, in their order.
    positions : Positions
        Their positions (mm), for ``save_graph`` and ``plot_graph``.
    """
    source = system_positions(positions) if positions in SYSTEMS else read_positions(positions)
    matched = match_channels(source, channels)
    graph = neighbor_graph(matched, method=method, max_distance_mm=max_distance_mm, edges_file=edges_file)
    return graph, matched


def _check_graph_args(positions, method, max_distance_mm, edges_file):
    if method not in METHODS:
        raise UserError(f"channel graph method must be one of {', '.join(METHODS)}, got {method!r}")
    if not positions.names:
        raise UserError("cannot build a channel graph without channels")
    if method == "distance" and max_distance_mm is None:
        raise UserError("channel graph method 'distance' needs max_distance_mm")
    if max_distance_mm is not None and not (np.isfinite(max_distance_mm) and max_distance_mm > 0):
        raise UserError(f"max_distance_mm must be a positive number of mm, got {max_distance_mm!r}")
    if method == "edges" and edges_file is None:
        raise UserError("channel graph method 'edges' needs edges_file")
    if method != "edges" and edges_file is not None:
        raise UserError(f"edges_file is used only with method 'edges', not {method!r}")
    if method == "edges" and max_distance_mm is not None:
        raise UserError("max_distance_mm is not used with method 'edges'")


def _delaunay_pairs(positions):
    """Index pairs of the triangulation edges of the projected positions."""
    names = positions.names
    n = len(names)
    if n < 3:
        return np.arange(n - 1), np.arange(1, n)
    flat = azimuthal_projection(positions.xyz)
    gaps = cdist(flat, flat) + np.eye(n)
    i, j = np.unravel_index(np.argmin(gaps), gaps.shape)
    if gaps[i, j] < 1e-9:
        raise UserError(
            f"channels {names[i]!r} and {names[j]!r} lie in the same direction from the "
            "head centre; the triangulation needs distinct positions"
        )
    centred = flat - flat.mean(axis=0)
    _, singular, axes = np.linalg.svd(centred, full_matrices=False)
    if singular[1] < 1e-9 * singular[0]:
        order = np.argsort(centred @ axes[0])
        return order[:-1], order[1:]
    return _cocircular_complete(Delaunay(flat), flat)


def _long_rim_edges(first, second, length, positions) -> np.ndarray:
    """Mask of the outline edges longer than ``RIM_FACTOR`` x the median edge length, longest first,
    each kept if dropping it would leave a channel without neighbors."""
    n = len(positions.names)
    if n < 4 or first.size == 0:
        return np.zeros(first.size, dtype=bool)
    try:
        hull = ConvexHull(azimuthal_projection(positions.xyz)).simplices
    except QhullError:  # the channels lie on one line: no outline to trim
        return np.zeros(first.size, dtype=bool)
    outline = {(min(a, b), max(a, b)) for a, b in hull.tolist()}
    degree = np.bincount(np.concatenate([first, second]), minlength=n)
    limit = RIM_FACTOR * np.median(length)
    drop = np.zeros(first.size, dtype=bool)
    for k in np.argsort(-length, kind="stable"):
        if length[k] <= limit:
            break
        a, b = int(first[k]), int(second[k])
        if (min(a, b), max(a, b)) in outline and degree[a] > 1 and degree[b] > 1:
            drop[k] = True
            degree[a] -= 1
            degree[b] -= 1
    return drop


def _cocircular_complete(triangulation, flat, rtol=1e-6):
    """Edges of a triangulation, with every pair joined inside co-circular cells.

    Where four or more points lie on one empty circle (a regular grid), the
    Delaunay triangulation is not unique and the diagonal it picks depends on
    rounding. Triangles that share such a circle are merged into one cell and
    all its points joined, which makes the graph unique and mirror-symmetric
    for symmetric layouts.
    """
    simplices, adjacent = triangulation.simplices, triangulation.neighbors
    parent = np.arange(len(simplices))

    def root(k):
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k

    for s, (a, b, c) in enumerate(flat[simplices]):
        d = 2 * (a[0] * (b[1] - c[1]) + b[0] * (c[1] - a[1]) + c[0] * (a[1] - b[1]))
        sq = (a**2).sum(), (b**2).sum(), (c**2).sum()
        centre = (
            np.array(
                [
                    sq[0] * (b[1] - c[1]) + sq[1] * (c[1] - a[1]) + sq[2] * (a[1] - b[1]),
                    sq[0] * (c[0] - b[0]) + sq[1] * (a[0] - c[0]) + sq[2] * (b[0] - a[0]),
                ]
            )
            / d
        )
        radius = np.linalg.norm(a - centre)
        for t in adjacent[s]:
            if t > s:
                far = np.setdiff1d(simplices[t], simplices[s])[0]
                if abs(np.linalg.norm(flat[far] - centre) - radius) <= rtol * radius:
                    parent[root(t)] = root(s)
    cells = {}
    for s, vertices in enumerate(simplices):
        cells.setdefault(root(s), set()).update(vertices.tolist())
    pairs = np.array([pair for cell in cells.values() for pair in combinations(sorted(cell), 2)])
    return pairs[:, 0], pairs[:, 1]


def _edge_file_pairs(path: Path, channels):
    """Index pairs from an edge-list TSV with columns channel_a, channel_b."""
    header, rows, _ = read_tsv(path)
    if "channel_a" not in header or "channel_b" not in header:
        raise UserError(
            f"{path}: expected a header with the columns channel_a, channel_b "
            f"(tab-separated), found: {', '.join(header)}"
        )
    ca, cb = header.index("channel_a"), header.index("channel_b")
    index = {channel_key(c): i for i, c in enumerate(channels)}
    first, second, unknown = [], [], []
    for number, fields in rows:
        a, b = fields[ca], fields[cb]
        for name in (a, b):
            if channel_key(name) not in index:
                unknown.append(f"{name!r} (line {number})")
        if channel_key(a) in index and channel_key(b) in index:
            if index[channel_key(a)] == index[channel_key(b)]:
                raise UserError(f"{path}, line {number}: channel {a!r} is paired with itself")
            first.append(index[channel_key(a)])
            second.append(index[channel_key(b)])
    if unknown:
        raise UserError(
            f"{path}: the edge list names channels that are not analysed: {', '.join(unknown)}; "
            f"analysed channels: {', '.join(channels)}"
        )
    return np.array(first, dtype=int), np.array(second, dtype=int)


def graph_summary(graph: ChannelGraph) -> str:
    """A few lines describing the graph: method, size, degree statistics, isolated channels."""
    degrees = graph.degrees
    isolated = ", ".join(graph.isolated) if graph.isolated else "none"
    return "\n".join(
        [
            f"channel graph: {graph.method}",
            f"channels: {len(graph.channels)}, edges: {graph.n_edges}",
            f"neighbors per channel: min {degrees.min()}, median {np.median(degrees):g}, max {degrees.max()}",
            f"isolated channels: {isolated}",
        ]
    )


def save_graph(path, graph: ChannelGraph, positions: Positions) -> None:
    """Write the graph and its positions to an NPZ file atomically.

    Parameters
    ----------
    path : str or Path
        Target file; written through a temporary file in the same folder and
        ``os.replace``, so readers never see a partial file.
    graph : ChannelGraph
    positions : Positions
        Positions of exactly ``graph.channels``, in that order.
    """
    if positions.names != graph.channels:
        raise ValueError("positions must list exactly the graph's channels, in the same order")
    path = Path(path)
    save_npz(
        path,
        format=np.str_(FILE_FORMAT),
        channels=np.array(graph.channels, dtype=str),
        indptr=graph.indptr,
        indices=graph.indices,
        method=np.str_(graph.method),
        xyz_mm=positions.xyz,
        source=np.str_(positions.source),
    )


def load_graph(path) -> tuple[ChannelGraph, Positions]:
    """Read a graph written by ``save_graph``.

    Returns
    -------
    graph : ChannelGraph
    positions : Positions
        Positions of ``graph.channels`` in mm.
    """
    path = Path(path)
    keys = ("format", "channels", "indptr", "indices", "method", "xyz_mm", "source")
    try:
        with np.load(path, allow_pickle=False) as data:
            if any(k not in data.files for k in keys) or str(data["format"]) != FILE_FORMAT:
                raise UserError(f"{path} is not a famwise channel graph file ({FILE_FORMAT})")
            fields = {k: data[k] for k in keys}
        channels = tuple(fields["channels"].tolist())
        graph = ChannelGraph(channels, fields["indptr"], fields["indices"], str(fields["method"]))
        positions = Positions(channels, fields["xyz_mm"], str(fields["source"]))
    except FileNotFoundError:
        raise UserError(f"channel graph file not found: {path}") from None
    except (OSError, ValueError) as error:
        raise UserError(f"cannot read channel graph file {path}: {error}") from None
    return graph, positions
