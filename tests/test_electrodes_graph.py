"""Channel neighbor graphs: triangulation, distance, edge lists, files and the drawing."""

import json
import warnings
from collections import deque
from itertools import combinations

import matplotlib
import numpy as np
import pytest

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from famwise.electrodes import (  # noqa: E402
    ChannelGraph,
    Positions,
    azimuthal_projection,
    channel_graph,
    graph_summary,
    load_graph,
    match_channels,
    neighbor_graph,
    plot_graph,
    read_positions,
    save_graph,
    system_positions,
)
from famwise.errors import FamwiseWarning, UserError  # noqa: E402

# a common 64-channel 10-10 layout
CAP64 = (
    "Fp1 Fpz Fp2 AF7 AF3 AFz AF4 AF8 F7 F5 F3 F1 Fz F2 F4 F6 F8 FT7 FC5 FC3 FC1 FCz FC2 FC4 FC6 FT8 "
    "T7 C5 C3 C1 Cz C2 C4 C6 T8 TP7 CP5 CP3 CP1 CPz CP2 CP4 CP6 TP8 P7 P5 P3 P1 Pz P2 P4 P6 P8 "
    "PO7 PO3 POz PO4 PO8 O1 Oz O2 P9 P10 Iz"
).split()


def _on_sphere(flat, radius_mm=85.0):
    """Inverse azimuthal equidistant projection: 2-D points (radians) to 3-D positions (mm)."""
    theta = np.hypot(flat[:, 0], flat[:, 1])
    phi = np.arctan2(flat[:, 1], flat[:, 0])
    return radius_mm * np.column_stack([np.sin(theta) * np.cos(phi), np.sin(theta) * np.sin(phi), np.cos(theta)])


def _edge_set(graph):
    return {frozenset(e) for e in graph.edges()}


def _connected(graph):
    seen, queue = {0}, deque([0])
    while queue:
        i = queue.popleft()
        for j in graph.indices[graph.indptr[i] : graph.indptr[i + 1]]:
            if j not in seen:
                seen.add(int(j))
                queue.append(int(j))
    return len(seen) == len(graph.channels)


def test_projection_is_equidistant_from_the_vertex():
    # definition of the azimuthal equidistant projection (common practice, no source):
    # the distance from the centre equals the great-circle angle from the vertex
    flat = np.array([[0.3, 0.1], [-0.5, 0.7], [0.0, -1.2], [0.0, 0.0]])
    np.testing.assert_allclose(azimuthal_projection(_on_sphere(flat)), flat, atol=1e-12)
    std = system_positions("10-20")
    flat = azimuthal_projection(std.xyz)
    fz, t7 = flat[std.names.index("Fz")], flat[std.names.index("T7")]
    np.testing.assert_allclose(
        fz, [0, np.pi / 4], atol=1e-6
    )  # Fz 45 degrees anterior on a sphere whose equator is the Fpz-T7-Oz-T8 circle (Jasper 1958 percentages)
    np.testing.assert_allclose(t7, [-np.pi / 2, 0], atol=1e-6)  # left on the left


def test_triangular_lattice_gives_its_six_neighbors():
    # Delaunay (1934): a triangular lattice has no four co-circular points, so the triangulation is
    # unique and joins exactly the lattice neighbors (one spacing apart)
    spacing = 0.12
    points = [
        (spacing * (i + j / 2), spacing * j * np.sqrt(3) / 2)
        for i in range(-3, 4)
        for j in range(-3, 4)
        if abs(i + j) <= 3
    ]
    flat = np.array(points)
    names = tuple(f"E{k}" for k in range(len(flat)))
    graph = neighbor_graph(Positions(names, _on_sphere(flat), "lattice"))
    expected = {
        frozenset((names[a], names[b]))
        for a, b in combinations(range(len(flat)), 2)
        if np.isclose(np.linalg.norm(flat[a] - flat[b]), spacing)
    }
    assert _edge_set(graph) == expected
    assert len(flat) == 37 and graph.n_edges == 90
    centre = names[int(np.argmin(np.hypot(flat[:, 0], flat[:, 1])))]
    assert len(graph.neighbors(centre)) == 6


def test_square_grid_joins_all_four_points_of_each_cell():
    # Delaunay (1934): the four corners of a square grid cell lie on one empty circle, so the
    # triangulation is not unique; famwise joins all points of such a cell (both diagonals),
    # which gives the 8-neighborhood of the grid whatever the rounding
    spacing, n = 0.1, 5
    grid = np.array([(spacing * (i - 2), spacing * (j - 2)) for i in range(n) for j in range(n)])
    names = tuple(f"G{i}{j}" for i in range(n) for j in range(n))
    expected = {
        frozenset((f"G{i}{j}", f"G{k}{m}"))
        for i in range(n)
        for j in range(n)
        for k in range(n)
        for m in range(n)
        if (i, j) != (k, m) and max(abs(i - k), abs(j - m)) == 1
    }
    for turn_deg in (0.0, 7.0, 45.0):  # the cell circles survive a rotation about the vertex
        turn = np.radians(turn_deg)
        rotated = grid @ np.array([[np.cos(turn), np.sin(turn)], [-np.sin(turn), np.cos(turn)]])
        graph = neighbor_graph(Positions(names, _on_sphere(rotated), "grid"))
        assert _edge_set(graph) == expected
    assert len(expected) == 2 * n * (n - 1) + 2 * (n - 1) ** 2
    assert set(graph.neighbors("G22")) == {f"G{i}{j}" for i in (1, 2, 3) for j in (1, 2, 3)} - {"G22"}


def test_graph_structure_invariants():
    graph = neighbor_graph(system_positions("10-10"))
    assert graph.indptr.dtype == np.int32 and graph.indices.dtype == np.int32
    assert graph.indptr.shape == (74,) and graph.indices.size == 2 * graph.n_edges
    dense = np.zeros((73, 73), dtype=int)
    for i in range(73):
        row = graph.indices[graph.indptr[i] : graph.indptr[i + 1]]
        assert np.all(np.diff(row) > 0) and i not in row
        dense[i, row] = 1
    np.testing.assert_array_equal(dense, dense.T)
    np.testing.assert_array_equal(graph.degrees, dense.sum(axis=1))
    with pytest.raises(ValueError, match="symmetric"):
        ChannelGraph(("a", "b"), [0, 1, 1], [1], "edges")


def test_ten_twenty_neighbors():
    # Jasper (1958) layout: Cz and Fz are adjacent; Fz and Pz are not neighbors
    graph = neighbor_graph(system_positions("10-20"))
    assert {"Fz", "Pz", "C3", "C4"} <= set(graph.neighbors("Cz"))
    assert "Pz" not in graph.neighbors("Fz")
    assert "t8" not in [c.lower() for c in graph.neighbors("T7")]


def test_cap64_from_names_alone_is_connected_with_plausible_degrees():
    # common practice, no source: a triangulated 64-channel cap has 3-8 neighbors per channel
    # (a triangulation has 3n - 3 - h edges for h hull points, Euler's formula; two co-circular
    # cells add one edge each)
    positions = match_channels(system_positions("10-10"), CAP64)
    graph = neighbor_graph(positions)
    assert graph.channels == tuple(CAP64)
    assert _connected(graph)
    assert not graph.isolated
    degrees = graph.degrees
    assert degrees.min() == 3 and np.median(degrees) == 6 and degrees.max() == 8
    assert graph.n_edges == 175  # the triangulation's 177 less the rim edges P9-Iz and P10-Iz
    assert {"FCz", "C1", "C2", "CPz"} <= set(graph.neighbors("Cz"))
    assert graph_summary(graph).splitlines() == [
        "channel graph: delaunay",
        "channels: 64, edges: 175",
        "neighbors per channel: min 3, median 6, max 8",
        "isolated channels: none",
    ]


def _write_electrodes(folder, names, xyz_m):
    rows = "".join(f"{n.upper()}\t{x:.7f}\t{y:.7f}\t{z:.7f}\n" for n, (x, y, z) in zip(names, xyz_m))
    tsv = folder / "sub-07_electrodes.tsv"
    tsv.write_text("name\tx\ty\tz\n" + rows + "HEOG\tn/a\tn/a\tn/a\n")
    (folder / "sub-07_coordsystem.json").write_text(json.dumps({"EEGCoordinateUnits": "m"}))
    return tsv


def test_cap64_from_a_users_electrodes_file(tmp_path):
    # BIDS specification: coordinates in m per _coordsystem.json, converted to mm
    std = match_channels(system_positions("10-10"), CAP64)
    reference = neighbor_graph(std)
    user = match_channels(read_positions(_write_electrodes(tmp_path, CAP64, std.xyz / 1000.0)), CAP64)
    np.testing.assert_allclose(user.xyz, std.xyz, atol=1e-3)
    assert _edge_set(neighbor_graph(user)) == _edge_set(reference)
    # a cap rotated by 4 degrees about the vertex axis: the projection rotates with it, so the
    # triangulation is the same (Delaunay 1934), co-circular cells of the idealised grid included
    angle = np.radians(4.0)
    rot = np.array([[np.cos(angle), -np.sin(angle), 0], [np.sin(angle), np.cos(angle), 0], [0, 0, 1]])
    user = match_channels(read_positions(_write_electrodes(tmp_path, CAP64, std.xyz @ rot.T / 1000.0)), CAP64)
    graph = neighbor_graph(user)
    assert _connected(graph) and not graph.isolated
    assert _edge_set(graph) == _edge_set(reference)


def test_delaunay_pruned_by_distance():
    positions = match_channels(system_positions("10-10"), CAP64)
    full = neighbor_graph(positions)
    pruned = neighbor_graph(positions, max_distance_mm=50.0)
    assert _edge_set(pruned) < _edge_set(full)
    index = {n: i for i, n in enumerate(CAP64)}
    for a, b in pruned.edges():
        assert np.linalg.norm(positions.xyz[index[a]] - positions.xyz[index[b]]) <= 50.0
    assert frozenset(("P9", "Iz")) not in _edge_set(full)  # cut by default as a long rim edge


def test_long_rim_edges_are_cut_unless_a_distance_is_given():
    # common practice, no source: edges along the open border of the cap join channels that are not neighbors
    positions = match_channels(system_positions("10-10"), CAP64)
    default = neighbor_graph(positions)
    uncut = neighbor_graph(positions, max_distance_mm=1000.0)
    assert _edge_set(uncut) - _edge_set(default) == {frozenset(("P9", "Iz")), frozenset(("P10", "Iz"))}
    index = {n: i for i, n in enumerate(CAP64)}
    lengths = [np.linalg.norm(positions.xyz[index[a]] - positions.xyz[index[b]]) for a, b in uncut.edges()]
    for a, b in ("P9", "Iz"), ("P10", "Iz"):
        assert np.linalg.norm(positions.xyz[index[a]] - positions.xyz[index[b]]) > 2 * np.median(lengths)
    assert not default.isolated


def test_distance_graph_matches_brute_force_and_grows_monotonically():
    # common practice, no source: a larger threshold can only add neighbors
    positions = system_positions("10-10")
    previous = set()
    for threshold in (20.0, 30.0, 35.0, 45.0, 60.0, 90.0, 200.0):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FamwiseWarning)
            graph = neighbor_graph(positions, method="distance", max_distance_mm=threshold)
        expected = {
            frozenset((a, b))
            for (a, xa), (b, xb) in combinations(zip(positions.names, positions.xyz), 2)
            if np.sqrt(np.sum((xa - xb) ** 2)) <= threshold
        }
        assert _edge_set(graph) == expected
        assert previous <= expected
        previous = expected
    assert len(previous) == 73 * 72 // 2  # 200 mm exceeds the 170 mm diameter: complete graph


def test_isolated_channels_warn():
    positions = system_positions("10-20")
    with pytest.warns(
        FamwiseWarning,
        match=r"channel graph \(distance\): 21 channel\(s\) without neighbors: "
        r"Fp1, .*; they can only form single-channel clusters",
    ):
        graph = neighbor_graph(positions, method="distance", max_distance_mm=10.0)
    assert graph.isolated == positions.names and graph.n_edges == 0
    assert graph_summary(graph).splitlines()[-1].startswith("isolated channels: Fp1, Fpz, Fp2")


def test_tiny_and_degenerate_layouts():
    std = system_positions("10-10")
    with pytest.warns(FamwiseWarning, match="Cz"):
        assert neighbor_graph(match_channels(std, ["Cz"])).n_edges == 0
    assert neighbor_graph(match_channels(std, ["Cz", "Pz"])).edges() == [("Cz", "Pz")]
    # collinear in the projection: a chain along the line
    chain = neighbor_graph(match_channels(std, ["Pz", "Fz", "Cz", "Oz"]))
    assert _edge_set(chain) == {frozenset(p) for p in [("Fz", "Cz"), ("Cz", "Pz"), ("Pz", "Oz")]}
    same = Positions(("A", "B", "C"), [[0, 0, 85], [0, 40, 40], [0, 80, 80]], "file.tsv")
    with pytest.raises(UserError, match=r"channels 'B' and 'C' lie in the same direction from the head centre"):
        neighbor_graph(same)


def test_edge_list_round_trip(tmp_path):
    positions = match_channels(system_positions("10-10"), CAP64)
    graph = neighbor_graph(positions)
    path = tmp_path / "edges.tsv"
    path.write_text("channel_a\tchannel_b\n" + "".join(f"{a}\t{b}\n" for a, b in graph.edges()))
    again = neighbor_graph(positions, method="edges", edges_file=path)
    assert again.method == "edges" and again.channels == graph.channels
    np.testing.assert_array_equal(again.indptr, graph.indptr)
    np.testing.assert_array_equal(again.indices, graph.indices)


def test_edge_list_accepts_case_aliases_repeats_and_extra_columns(tmp_path):
    positions = match_channels(system_positions("10-10"), ["T7", "C3", "Cz"])
    path = tmp_path / "edges.tsv"
    path.write_text("channel_a\tchannel_b\tnote\nt3\tc3\tleft\nC3\tCZ\t\nCz\tC3\trepeat\n")
    graph = neighbor_graph(positions, method="edges", edges_file=path)
    assert graph.edges() == [("T7", "C3"), ("C3", "Cz")]


def test_edge_list_unknown_channels(tmp_path):
    positions = match_channels(system_positions("10-10"), ["T7", "C3", "Cz"])
    path = tmp_path / "edges.tsv"
    path.write_text("channel_a\tchannel_b\nT7\tC3\nC3\tC5\nFz\tCz\n")
    with pytest.raises(
        UserError,
        match=r"edges\.tsv: the edge list names channels that are not analysed: "
        r"'C5' \(line 3\), 'Fz' \(line 4\); analysed channels: T7, C3, Cz",
    ):
        neighbor_graph(positions, method="edges", edges_file=path)


def test_edge_list_bad_header_and_self_pair(tmp_path):
    positions = match_channels(system_positions("10-10"), ["T7", "C3", "Cz"])
    path = tmp_path / "edges.tsv"
    path.write_text("from\tto\nT7\tC3\n")
    with pytest.raises(
        UserError,
        match=r"edges\.tsv: expected a header with the columns channel_a, channel_b "
        r"\(tab-separated\), found: from, to",
    ):
        neighbor_graph(positions, method="edges", edges_file=path)
    path.write_text("channel_a\tchannel_b\nT7\tC3\nCz\tcz\n")
    with pytest.raises(UserError, match=r"edges\.tsv, line 3: channel 'Cz' is paired with itself"):
        neighbor_graph(positions, method="edges", edges_file=path)
    with pytest.raises(UserError, match=r"file not found: .*nowhere\.tsv"):
        neighbor_graph(positions, method="edges", edges_file=tmp_path / "nowhere.tsv")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"method": "knn"}, r"channel graph method must be one of delaunay, distance, edges, got 'knn'"),
        ({"method": "distance"}, r"channel graph method 'distance' needs max_distance_mm"),
        ({"method": "distance", "max_distance_mm": -5}, r"max_distance_mm must be a positive number of mm, got -5"),
        ({"method": "edges"}, r"channel graph method 'edges' needs edges_file"),
        ({"edges_file": "e.tsv"}, r"edges_file is used only with method 'edges', not 'delaunay'"),
        (
            {"method": "edges", "edges_file": "e.tsv", "max_distance_mm": 3},
            r"max_distance_mm is not used with method 'edges'",
        ),
    ],
)
def test_bad_graph_settings(kwargs, message):
    with pytest.raises(UserError, match=message):
        neighbor_graph(system_positions("10-20"), **kwargs)


def test_save_load_round_trip(tmp_path):
    positions = match_channels(system_positions("10-10"), CAP64)
    graph = neighbor_graph(positions)
    path = tmp_path / "graph" / "channels.npz"
    save_graph(path, graph, positions)
    assert [p.name for p in path.parent.iterdir()] == ["channels.npz"]  # no temporary file left
    loaded, loaded_positions = load_graph(path)
    assert loaded.channels == graph.channels and loaded.method == "delaunay"
    np.testing.assert_array_equal(loaded.indptr, graph.indptr)
    np.testing.assert_array_equal(loaded.indices, graph.indices)
    assert loaded_positions.names == positions.names and loaded_positions.source == positions.source
    np.testing.assert_array_equal(loaded_positions.xyz, positions.xyz)
    save_graph(path, neighbor_graph(positions, method="distance", max_distance_mm=40.0), positions)
    assert load_graph(path)[0].method == "distance"  # replaced in place


def test_load_graph_errors(tmp_path):
    with pytest.raises(UserError, match=r"channel graph file not found: .*absent\.npz"):
        load_graph(tmp_path / "absent.npz")
    other = tmp_path / "other.npz"
    np.savez(other, values=np.zeros(3))
    with pytest.raises(UserError, match=r"other\.npz is not a famwise channel graph file"):
        load_graph(other)
    broken = tmp_path / "broken.npz"
    broken.write_bytes(b"not a zip file")
    with pytest.raises(UserError, match=r"cannot read channel graph file .*broken\.npz"):
        load_graph(broken)


def test_plot_graph_draws_edges_and_labels():
    positions = match_channels(system_positions("10-10"), CAP64)
    graph = neighbor_graph(positions)
    fig, ax = plt.subplots()
    try:
        plot_graph(graph, positions, ax)
        assert len(ax.lines) == graph.n_edges
        assert sorted(t.get_text() for t in ax.texts) == sorted(CAP64)
        assert len(ax.patches) == 4  # head, nose, two ears
        np.testing.assert_allclose(ax.collections[0].get_offsets(), azimuthal_projection(positions.xyz))
    finally:
        plt.close(fig)
    with pytest.raises(ValueError, match="same order"):
        plot_graph(graph, system_positions("10-10"), ax)


def _mirror(name):
    stem = name.rstrip("0123456789")
    if stem == name:
        return name
    number = int(name[len(stem) :])
    return f"{stem}{number + 1 if number % 2 else number - 1}"


@pytest.mark.parametrize("system", ["10-10", "10-20"])
def test_standard_graph_is_mirror_symmetric(system):
    # Jasper (1958): the layout is left/right symmetric, so its (unique) triangulation is too
    graph = neighbor_graph(system_positions(system))
    edges = _edge_set(graph)
    assert {frozenset(_mirror(c) for c in edge) for edge in edges} == edges


def test_channel_graph_in_one_call(tmp_path):
    graph, positions = channel_graph(["t3", "C3", "Cz", "C4", "T4", "Fz", "Pz"], positions="10-20")
    assert positions.names == graph.channels == ("t3", "C3", "Cz", "C4", "T4", "Fz", "Pz")
    assert set(graph.neighbors("Cz")) == {"C3", "C4", "Fz", "Pz"}
    path = tmp_path / "caps.tsv"
    path.write_text("name\tx\ty\tz\nFz\t0\t60\t60\nCz\t0\t0\t85\nPz\t0\t-60\t60\n")
    graph, positions = channel_graph(["Pz", "Cz", "Fz"], positions=path, method="distance", max_distance_mm=70)
    assert graph.edges() == [("Pz", "Cz"), ("Cz", "Fz")]
    with pytest.raises(UserError, match=r"no position in .*caps\.tsv for 1 analysed channel: 'Oz'"):
        channel_graph(["Pz", "Oz"], positions=path)
