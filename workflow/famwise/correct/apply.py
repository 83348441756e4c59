"""Correction stage: observed statistics and merged null shards -> one correction's result.

With ``family: all-contrasts`` every contrast's points form one family: the
p-value procedures count the points of all contrasts, and the max-statistic,
cluster and TFCE nulls take the largest value over contrasts per permutation
(all contrasts share the permutation table). Points the observed stage left
out (``left_out``) are not in any family: not counted in m, never
significant (p NaN, mask False); cluster and TFCE see their statistic as 0.
"""

import dataclasses
import json
from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.correct import maxstat, pvalues
from famwise.correct.result import CorrectionResult
from famwise.errors import UserError
from famwise.nulls.collectors.protocol import merge_shard_arrays
from famwise.observed import left_out_points, load_observed, stored_forming_threshold
from famwise.settings import CorrectionSettings


def _load(path: Path) -> dict[str, np.ndarray]:
    with np.load(path, allow_pickle=False) as archive:
        return {key: archive[key] for key in archive.files}


def _contrast_of(path: Path) -> str:
    return path.parts[path.parts.index("contrasts") + 1]


def _merged_nulls(files: list[Path]) -> tuple[dict[str, np.ndarray], int]:
    shards = [_load(f) for f in sorted(files, key=lambda p: int(p.stem.split("-")[1]))]
    n_rows = int(shards[0]["n_rows.total"])
    collected = [{k: v for k, v in s.items() if k not in ("rows", "n_rows.total")} for s in shards]
    merged = merge_shard_arrays(collected)
    return merged, n_rows


def apply_correction(
    inputs: list[Path], *, contrast: str, settings: CorrectionSettings
) -> tuple[CorrectionResult, tuple]:
    """Run one correction for one contrast.

    Parameters
    ----------
    inputs : list of path
        ``contrasts/<c>/observed.npz`` and null shards of this contrast (of
        every contrast for ``all-contrasts``), and ``channels/graph.npz`` for
        cluster and TFCE corrections.
    contrast : str
        The contrast whose result is returned.
    settings : CorrectionSettings
        The correction's settings (see ``famwise.plan.Plan.correction_settings``).

    Returns
    -------
    result : CorrectionResult
    shape : tuple
        (n_channels, n_freqs, n_times) of the contrast's points.
    """
    correction = settings.correction
    method = correction.method
    alpha = settings.alpha
    observed, shards, graph, family_shards = {}, {}, None, []
    for path in inputs:
        if path.name == "observed.npz":
            observed[_contrast_of(path)] = load_observed(path)
        elif path.name == "graph.npz":
            graph = _load(path)
        elif path.parts[0] == "family":
            family_shards.append(path)
        else:
            shards.setdefault(_contrast_of(path), []).append(path)
    names = [c for c in settings.contrasts if c in observed]
    nulls = {name: _merged_nulls(files) for name, files in shards.items()}
    if len({n for _, n in nulls.values()}) > 1:
        raise UserError(
            "inference.family: all-contrasts needs contrasts that share one permutation table (same test design and subjects)"
        )
    mine = observed[contrast]
    shape = mine["stat"].shape
    keeps = {name: ~left_out_points(observed[name]) for name in names}
    keep = keeps[contrast]
    tail = str(mine["tail"])
    key = correction.label

    if method in pvalues.METHODS:
        level = correction.level or alpha
        if correction.pvalues == "permutation":
            ps = [nulls[c][0]["exceed.count"] / nulls[c][1] for c in names]
        else:
            ps = [observed[c]["p"].reshape(-1) for c in names]
        ps = [p[keeps[c]] for p, c in zip(ps, names)]
        sizes = [p.size for p in ps]
        joint = pvalues.adjust(np.concatenate(ps), method=method, alpha=level)
        result = _included(_slice(joint, sizes, names.index(contrast)), keep)
    elif method == "max-stat":
        n_rows = nulls[contrast][1]
        max_null = np.max([nulls[c][0][f"{key}.max"] for c in names], axis=0)
        stat = mine["stat"].reshape(-1)[keep]
        if correction.step_down and len(names) > 1:
            family, family_rows = _merged_nulls(family_shards)
            joint_keep = np.concatenate([keeps[c] for c in names])
            results = maxstat.step_down_family(
                [observed[c]["stat"].reshape(-1)[keeps[c]] for c in names],
                family[f"{key}.count"][joint_keep],
                family_rows,
                tail=tail,
                alpha=alpha,
                max_null=max_null,
            )
            result = results[names.index(contrast)]
        elif correction.step_down:
            counts = nulls[contrast][0][f"{key}.count"][keep]
            result = maxstat.step_down(stat, counts, n_rows, tail=tail, alpha=alpha, max_null=max_null)
        else:
            result = maxstat.single_step(stat, max_null, tail=tail, alpha=alpha)
        result = _included(result, keep)
    elif method in ("cluster", "tfce"):
        max_null = np.max([nulls[c][0][f"{key}.max"] for c in names], axis=0)
        result = _cluster_or_tfce(mine, max_null, graph, settings)
        if not keep.all():  # statistic 0 at left-out points: never in a cluster, never significant
            p_corrected = np.where(keep.reshape(shape), result.p_corrected, np.nan)
            result = dataclasses.replace(result, p_corrected=p_corrected, mask=result.mask & keep.reshape(shape))
    else:
        raise ValueError(f"unknown correction method {method!r}")
    return result, shape


def _cluster_or_tfce(
    mine: dict, max_null: np.ndarray, graph: dict | None, settings: CorrectionSettings
) -> CorrectionResult:
    """Cluster or TFCE inference on one contrast's observed map against the null maxima."""
    correction, alpha = settings.correction, settings.alpha
    shape, tail, key, dims = mine["stat"].shape, str(mine["tail"]), correction.label, correction.dims
    if graph is None:
        indptr, indices = np.zeros(shape[0] + 1, np.int32), np.zeros(0, np.int32)
    else:
        indptr, indices = graph["indptr"].astype(np.int32), graph["indices"].astype(np.int32)
    if correction.method == "cluster":
        from famwise.correct import clusters  # numba kernels: imported only when used

        return clusters.cluster_inference(
            mine["stat"],
            max_null,
            threshold=stored_forming_threshold(mine, key),
            indptr=indptr,
            indices=indices,
            dims=dims,
            cluster_stat=correction.cluster_stat,
            min_supra_neighbors=correction.min_supra_neighbors,
            tail=tail,
            alpha=alpha,
            channels=[str(c) for c in mine["channels"]],
            freqs=mine["freqs"],
            times=mine["times"],
        )
    from famwise.correct import tfce
    from famwise.correct.regions import significant_regions

    result = tfce.tfce_inference(
        mine["stat"],
        max_null,
        indptr=indptr,
        indices=indices,
        dims=dims,
        E=correction.E,
        H=correction.H,
        step=correction.step,
        tail=tail,
        alpha=alpha,
    )
    region_id, rows = significant_regions(
        result.maps["tfce"],
        result.p_corrected,
        result.mask,
        mine["stat"],
        indptr=indptr,
        indices=indices,
        dims=dims,
        channels=[str(c) for c in mine["channels"]],
        freqs=mine["freqs"],
        times=mine["times"],
    )
    return dataclasses.replace(result, maps={**result.maps, "cluster_id": region_id}, clusters=rows)


def _included(result: CorrectionResult, keep: np.ndarray) -> CorrectionResult:
    """A result on the included points (flat ``keep``) spread over every point: left-out p NaN, mask False."""
    if keep.all():
        return result
    p_corrected = np.full(keep.size, np.nan)
    p_corrected[keep] = np.asarray(result.p_corrected).reshape(-1)
    mask = np.zeros(keep.size, dtype=bool)
    mask[keep] = np.asarray(result.mask).reshape(-1)
    return dataclasses.replace(result, p_corrected=p_corrected, mask=mask)


def _slice(joint: CorrectionResult, sizes: list[int], index: int) -> CorrectionResult:
    """This contrast's part of a correction applied to the concatenated points of several."""
    start = sum(sizes[:index])
    stop = start + sizes[index]
    return CorrectionResult(
        method=joint.method,
        p_corrected=joint.p_corrected[start:stop],
        mask=joint.mask[start:stop],
        threshold=joint.threshold,
        threshold_kind=joint.threshold_kind,
        settings=joint.settings,
    )


def save_result(
    path: Path, result: CorrectionResult, *, shape: tuple, settings: CorrectionSettings, voltage: bool = False
) -> None:
    """Write ``result.npz`` (and ``clusters.tsv`` + sidecar for cluster and TFCE results) atomically.

    ``voltage`` (the contrast's maps are voltage maps, `famwise.axes.is_voltage`) leaves the frequency columns
    out of the table.
    """
    arrays = {
        "p_corrected": np.asarray(result.p_corrected, dtype=np.float64).reshape(shape),
        "mask": np.asarray(result.mask, dtype=bool).reshape(shape),
        "threshold": np.array(np.nan if result.threshold is None else result.threshold, dtype=np.float64),
        "threshold_kind": result.threshold_kind,
        "method": settings.correction.method,
        "settings": json.dumps(settings.record() | {"result": result.settings}, default=float),
        "n_significant": np.array(result.n_significant),
    }
    if result.null is not None:
        arrays["null"] = np.asarray(result.null, dtype=np.float64)
    for name, values in result.maps.items():
        arrays[name] = np.asarray(values).reshape(shape)
    if settings.correction.method == "cluster":
        from famwise.correct import clusters

        clusters.write_cluster_table(path.with_name("clusters.tsv"), result.clusters, voltage=voltage)
    elif settings.correction.method == "tfce":
        from famwise.correct import clusters, regions

        clusters.write_cluster_table(
            path.with_name("clusters.tsv"), result.clusters, sidecar=regions.REGION_SIDECAR, voltage=voltage
        )
    save_npz(path, **arrays)
