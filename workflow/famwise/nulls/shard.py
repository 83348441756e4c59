"""The shard runner: one shard of the permutation table through every correction's collector.

The permutation table comes from the seed and the contrast's design; shard
``k`` takes its row range, so the merged null is bit-identical whatever the
number of shards.
"""

from collections.abc import Callable
from pathlib import Path

import numpy as np

from famwise.degenerate import blank
from famwise.design import ContrastData, load_contrast
from famwise.nulls.collectors.exceedance import ExceedanceCollector
from famwise.nulls.collectors.maxima import MaxStatCollector, StepDownCollector
from famwise.nulls.engine import iter_null_blocks, run_shard
from famwise.nulls.screen import BlockScreen
from famwise.nulls.tables import make_table, shard_bounds, smallest_attainable_p
from famwise.observed import left_out_points, load_observed, stored_forming_threshold
from famwise.settings import CollectorSettings, NullSettings, ObservedSettings


def table_for(data: ContrastData, *, settings: NullSettings):
    """The study's permutation table for one contrast."""
    n_conditions = data.x.shape[1] if data.test == "repeated-measures" else None
    return make_table(
        data.test,
        n_subjects=len(data.subjects),
        permutations=settings.permutations,
        seed=settings.seed,
        groups=data.groups,
        n_conditions=n_conditions,
    )


def identity_statistic(data: ContrastData, *, settings: ObservedSettings | NullSettings) -> np.ndarray:
    """The observed statistic computed by the permutation engine (row 0, the identity).

    The corrections compare every permutation with this map, so it must be the
    same bits the null's identity row gets, whatever the block or shard.
    """
    n_conditions = data.x.shape[1] if data.test == "repeated-measures" else None
    identity = make_table(
        data.test, n_subjects=len(data.subjects), permutations=1, seed=0, groups=data.groups, n_conditions=n_conditions
    ).rows[:1]
    block = next(
        iter_null_blocks(
            data.x,
            identity,
            test=data.test,
            groups=data.groups,
            covariate=data.covariate,
            nuisance=data.nuisance,
            statistic=settings.statistic,
            trim=settings.trim,
            equal_var=settings.equal_var,
        )
    )
    return np.asarray(block[0], dtype=np.float64)


def permutation_info(subjects_file: Path, *, settings: NullSettings) -> dict:
    """Size and kind of a contrast's permutation table (for the report)."""
    data = load_contrast(subjects_file)
    table = table_for(data, settings=settings)
    return {
        "n_rows": int(table.n_rows),
        "exact": bool(table.exact),
        "scheme": table.scheme,
        "permutations": settings.permutations,
        "smallest_p": float(smallest_attainable_p(table, tail=settings.tail)),
    }


def load_graph_arrays(path: Path | None, n_channels: int) -> tuple[np.ndarray, np.ndarray]:
    """CSR neighbor arrays of the channel graph (no edges when there is no graph)."""
    if path is None:
        return np.zeros(n_channels + 1, dtype=np.int32), np.zeros(0, dtype=np.int32)
    with np.load(path, allow_pickle=False) as archive:
        return archive["indptr"].astype(np.int32), archive["indices"].astype(np.int32)


def make_collectors(specs: tuple[CollectorSettings, ...], *, observed: dict, shape: tuple, graph: tuple) -> list:
    """One collector per entry of the null settings' ``collectors``.

    A cluster collector's forming threshold is the one the observed stage
    stored in ``observed`` (``forming_threshold.<label>``). The max-statistic
    collectors leave out the points of ``left_out``; the others see them as
    0 (`famwise.nulls.screen.BlockScreen`).
    """
    stat = observed["stat"].reshape(-1)
    tail = str(observed["tail"])
    left_out = left_out_points(observed)
    keep = ~left_out if left_out.any() else None
    indptr, indices = graph
    collectors = []
    for spec in specs:
        kind, key = spec.kind, spec.key
        if kind == "exceed":
            collectors.append(ExceedanceCollector(stat, tail=tail, key=key))
        elif kind == "maxstat":
            collectors.append(MaxStatCollector(tail=tail, key=key, keep=keep))
        elif kind == "stepdown":
            collectors.append(MaxStatCollector(tail=tail, key=key, keep=keep))
            collectors.append(StepDownCollector(stat, tail=tail, key=key, keep=keep))
        elif kind == "cluster":
            from famwise.nulls.collectors.largest_cluster import (
                ClusterCollector,
            )  # numba kernels: imported only when used

            collectors.append(
                ClusterCollector(
                    threshold=stored_forming_threshold(observed, key),
                    shape=shape,
                    indptr=indptr,
                    indices=indices,
                    dims=spec.dims,
                    cluster_stat=spec.cluster_stat,
                    min_supra_neighbors=spec.min_supra_neighbors,
                    tail=tail,
                    key=key,
                )
            )
        elif kind == "tfce":
            from famwise.nulls.collectors.largest_tfce import TFCECollector

            collectors.append(
                TFCECollector(
                    shape=shape,
                    indptr=indptr,
                    indices=indices,
                    dims=spec.dims,
                    E=spec.E,
                    H=spec.H,
                    step=spec.step,
                    tail=tail,
                    key=key,
                )
            )
        else:
            raise ValueError(f"unknown collector kind {kind!r}")
    return collectors


def null_shard(
    subjects_file: Path,
    observed_file: Path,
    graph_file: Path | None,
    *,
    shard: int,
    settings: NullSettings,
    progress: Callable[[str], None] | None = None,
) -> dict[str, np.ndarray]:
    """Run shard ``shard`` of the contrast's permutation table.

    Returns the collectors' arrays plus ``rows`` (start, stop) and ``n_rows``.
    """
    data = load_contrast(subjects_file)
    with np.load(observed_file, allow_pickle=False) as archive:
        observed = {key: archive[key] for key in archive.files}
    table = table_for(data, settings=settings)
    start, stop = shard_bounds(table.n_rows, settings.shards, shard)
    graph = load_graph_arrays(graph_file, len(data.channels))
    collectors = make_collectors(settings.collectors, observed=observed, shape=data.shape, graph=graph)
    if progress:
        kind = "exact enumeration" if table.exact else "Monte Carlo"
        progress(
            f"shard {shard}: rows {start}..{stop} of {table.n_rows} ({table.scheme}, {kind}), {data.x.shape[-1]} points"
        )
    left_out = left_out_points(observed)
    arrays = run_shard(
        blank(data.x, left_out),
        table.rows[start:stop],
        collectors=collectors,
        test=data.test,
        groups=data.groups,
        covariate=data.covariate,
        nuisance=data.nuisance,
        statistic=settings.statistic,
        trim=settings.trim,
        equal_var=settings.equal_var,
        screen=BlockScreen(left_out, tail=str(observed["tail"])),
    )
    arrays["rows"] = np.array([start, stop])
    arrays["n_rows.total"] = np.array(table.n_rows)
    if progress:
        progress(f"shard {shard}: done")
    return arrays


def family_stepdown_shard(
    subjects_files: list[Path],
    observed_files: list[Path],
    *,
    shard: int,
    settings: NullSettings,
    key: str,
    progress: Callable[[str], None] | None = None,
) -> dict[str, np.ndarray]:
    """Shard ``shard`` of a step-down max-statistic ranked over every contrast together.

    The contrasts share the permutation table; each block's maps of all
    contrasts are concatenated along the point axis (in the order given) and
    fed to one step-down collector, whose counts therefore rank all points of
    the family jointly.
    """
    datas = [load_contrast(path) for path in subjects_files]
    observed = [load_observed(path) for path in observed_files]
    left_out = [left_out_points(o) for o in observed]
    tail = str(observed[0]["tail"])
    table = table_for(datas[0], settings=settings)
    start, stop = shard_bounds(table.n_rows, settings.shards, shard)
    joint_left_out = np.concatenate(left_out)
    collector = StepDownCollector(
        np.concatenate([o["stat"].reshape(-1) for o in observed]),
        tail=tail,
        key=key,
        keep=~joint_left_out if joint_left_out.any() else None,
    )
    streams = [
        iter_null_blocks(
            blank(data.x, mask),
            table.rows[start:stop],
            test=data.test,
            groups=data.groups,
            covariate=data.covariate,
            nuisance=data.nuisance,
            statistic=settings.statistic,
            trim=settings.trim,
            equal_var=settings.equal_var,
        )
        for data, mask in zip(datas, left_out)
    ]
    screens = [BlockScreen(mask, tail=tail) for mask in left_out]
    if progress:
        progress(f"family shard {shard}: rows {start}..{stop} of {table.n_rows}, {len(datas)} contrasts ranked jointly")
    for blocks in zip(*streams):
        collector.update(np.concatenate([screen(block) for screen, block in zip(screens, blocks)], axis=1))
    arrays = collector.arrays()
    arrays["rows"] = np.array([start, stop])
    arrays["n_rows.total"] = np.array(table.n_rows)
    return arrays
