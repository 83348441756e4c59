"""Cluster-based permutation inference over channels x frequencies x times.

Points (channel, frequency, time) whose statistic passes the cluster-forming
threshold are grouped into clusters on the product neighborhood: (c, f, t)
touches (c, f +- 1, t), (c, f, t +- 1) and (c', f, t) for every neighbor c' of
c in the channel graph; a dimension left out of ``dims`` is not linked.
Positive (stat > threshold) and negative (stat < -threshold) points form
separate clusters. The cluster statistic is the mass (sum of |stat|) or the
size (number of points). The null is the largest cluster statistic of each
permutation over both signs, and a cluster's p is the share of permutations
(identity included) whose largest cluster statistic reaches it.

``min_supra_neighbors``: a supra-threshold point joins a cluster only if at
least that many of its neighbor channels are supra-threshold with the same
sign at the same frequency and time (counted on the raw supra-threshold map,
once, and whatever ``dims`` says). 0 keeps every supra-threshold point.

References
----------
Maris E, Oostenveld R (2007). Nonparametric statistical testing of EEG- and
MEG-data. J Neurosci Methods 164(1):177-190.
Bullmore ET et al. (1999). Global, voxel, and cluster tests, by theory and
permutation, for a difference between two groups of structural MR images of
the brain. IEEE Trans Med Imaging 18(1):32-42.
"""

import json
import math
import os

import numpy as np

from famwise.atomic import write_text
from famwise.axes import FREQUENCY_COLUMNS
from famwise.correct.result import CorrectionResult
from famwise.errors import UserError
from famwise.kernels.components import _cluster_roots
from famwise.nulls.collectors.kernel_inputs import DIMS, check_cluster_settings, check_dims, check_graph, tail_code

# Ties within this relative tolerance count as reaching the observed value, so
# rounding differences between the observed map and a permuted copy of it
# (e.g. the all-flipped row of an exact enumeration) never split a tie.
TIE_RTOL = 1e-9

CLUSTER_COLUMNS = (
    "id",
    "sign",
    "statistic",
    "p",
    "n_points",
    "channels",
    "time_start_ms",
    "time_end_ms",
    "freq_low_hz",
    "freq_high_hz",
    "peak_stat",
    "peak_channel",
    "peak_freq_hz",
    "peak_time_ms",
)
CLUSTER_SIDECAR = {
    "id": {
        "Description": "Cluster number as in the cluster_id map: positive clusters 1, 2, ..., "
        "negative clusters -1, -2, ..., each numbered by descending statistic."
    },
    "sign": {
        "Description": "Sign of the statistic in the cluster.",
        "Levels": {"positive": "stat > +threshold", "negative": "stat < -threshold"},
    },
    "statistic": {
        "Description": "Cluster statistic: mass (sum of |stat| over the cluster's points) or size "
        "(number of points), as in the settings."
    },
    "p": {
        "Description": "Permutation p-value: share of permutations (identity included) whose largest "
        "cluster statistic is at least this cluster's."
    },
    "n_points": {"Description": "Number of (channel, frequency, time) points in the cluster."},
    "channels": {"Description": "Comma-separated names of the channels the cluster covers, in position-table order."},
    "time_start_ms": {"Description": "Earliest time point of the cluster.", "Units": "ms"},
    "time_end_ms": {"Description": "Latest time point of the cluster.", "Units": "ms"},
    "freq_low_hz": {"Description": "Lowest frequency of the cluster.", "Units": "Hz"},
    "freq_high_hz": {"Description": "Highest frequency of the cluster.", "Units": "Hz"},
    "peak_stat": {"Description": "Statistic of largest magnitude in the cluster (signed)."},
    "peak_channel": {"Description": "Channel of the peak."},
    "peak_freq_hz": {"Description": "Frequency of the peak.", "Units": "Hz"},
    "peak_time_ms": {"Description": "Time of the peak.", "Units": "ms"},
}


def check_alpha(alpha):
    """Validate the family-wise level."""
    if not 0.0 < alpha < 1.0:
        raise UserError(f"alpha must be between 0 and 1, got {alpha}")


def count_at_least(null, values):
    """p of each value: (1 + #{null[1:] >= value, within TIE_RTOL}) / len(null).

    Row 0 of the null is the identity, i.e. the observed data itself, so it
    always counts.
    """
    rest = np.sort(np.asarray(null, dtype=np.float64)[1:])
    values = np.asarray(values, dtype=np.float64)
    below = np.searchsorted(rest, values - TIE_RTOL * np.abs(values), side="left")
    return (1 + rest.size - below) / (rest.size + 1)


def critical_value(null, alpha):
    """Largest null value a statistic must exceed to reach p <= alpha."""
    ordered = np.sort(np.asarray(null, dtype=np.float64))[::-1]
    return float(ordered[min(int(math.floor(alpha * len(ordered) + 1e-9)), len(ordered) - 1)])


def label_clusters(
    stat, *, threshold, indptr, indices, dims=DIMS, cluster_stat="mass", min_supra_neighbors=0, tail="two-sided"
):
    """Cluster labels of one map, numbered by descending statistic within each sign.

    Parameters
    ----------
    stat : ndarray, shape (n_channels, n_freqs, n_times)

    Returns
    -------
    cluster_id : ndarray of int32, same shape
        0 outside clusters, +k for the k-th positive cluster, -k for the k-th
        negative cluster.
    statistics : dict of int to float
        Cluster statistic of each id (same arithmetic as the null's ``ClusterCollector``).
    """
    check_cluster_settings(threshold, cluster_stat, min_supra_neighbors)
    stat = np.ascontiguousarray(stat, dtype=np.float64)
    shape, indptr, indices = check_graph(stat.shape, indptr, indices)
    flat = stat.ravel()
    parent = np.empty(flat.size, np.int32)
    acc = np.empty(flat.size, np.float64)
    _cluster_roots(
        flat,
        float(threshold),
        tail_code(tail),
        *shape,
        indptr,
        indices,
        *check_dims(dims),
        cluster_stat == "mass",
        int(min_supra_neighbors),
        parent,
        acc,
    )
    roots = np.flatnonzero(parent == np.arange(flat.size))
    lookup = np.zeros(flat.size, np.int32)
    statistics = {}
    for sign in (1, -1):
        mine = roots[np.sign(flat[roots]) == sign]
        mine = mine[np.lexsort((mine, -acc[mine]))]  # descending statistic, ties by position
        lookup[mine] = sign * np.arange(1, mine.size + 1)
        statistics.update({int(sign * (k + 1)): float(acc[r]) for k, r in enumerate(mine)})
    inside = parent >= 0
    cluster_id = np.zeros(flat.size, np.int32)
    cluster_id[inside] = lookup[parent[inside]]
    return cluster_id.reshape(stat.shape), statistics


def cluster_inference(
    observed_stat,
    null_max,
    *,
    threshold,
    indptr,
    indices,
    dims=DIMS,
    cluster_stat="mass",
    min_supra_neighbors=0,
    tail="two-sided",
    alpha=0.05,
    channels,
    freqs,
    times,
):
    """Cluster-based permutation inference on the merged null.

    Parameters
    ----------
    observed_stat : ndarray, shape (n_channels, n_freqs, n_times)
        Observed statistic map.
    null_max : ndarray, shape (n_rows,)
        Largest cluster statistic of every permutation-table row (row 0 = identity).
    threshold, indptr, indices, dims, cluster_stat, min_supra_neighbors, tail
        As given to ``famwise.nulls.collectors.largest_cluster.ClusterCollector``.
    alpha : float
        Family-wise level.
    channels : list of str
        Channel names (n_channels).
    freqs : ndarray, shape (n_freqs,)
        Frequencies in Hz.
    times : ndarray, shape (n_times,)
        Times in s.

    Returns
    -------
    CorrectionResult
        ``maps["cluster_id"]`` int32 map, ``p_corrected`` the p of each
        point's cluster (1 outside), ``threshold`` the critical cluster
        statistic (a cluster whose statistic exceeds it is significant),
        ``clusters`` one dict per cluster (columns ``CLUSTER_COLUMNS``) sorted
        by p then descending statistic, ``null`` = ``null_max``.

    References
    ----------
    Maris E, Oostenveld R (2007). J Neurosci Methods 164(1):177-190.
    """
    check_alpha(alpha)
    observed_stat = np.asarray(observed_stat, dtype=np.float64)
    null_max = np.asarray(null_max, dtype=np.float64)
    if null_max.ndim != 1 or null_max.size < 1:
        raise ValueError(f"null_max must be a non-empty 1-D array, got shape {null_max.shape}")
    _check_axes(observed_stat.shape, channels, freqs, times)
    cluster_id, statistics = label_clusters(
        observed_stat,
        threshold=threshold,
        indptr=indptr,
        indices=indices,
        dims=dims,
        cluster_stat=cluster_stat,
        min_supra_neighbors=min_supra_neighbors,
        tail=tail,
    )
    ids = np.array(sorted(statistics), dtype=np.int64)
    p_values = count_at_least(null_max, [statistics[i] for i in ids.tolist()])
    offset = int(np.abs(ids).max(initial=0))
    p_lookup = np.ones(2 * offset + 1)
    p_lookup[ids + offset] = p_values
    flat_id = cluster_id.ravel()
    p_map = p_lookup[flat_id + offset].reshape(cluster_id.shape)
    rows = [
        cluster_row(
            i, statistics[i], p, np.unravel_index(points, cluster_id.shape), observed_stat, channels, freqs, times
        )
        for i, p, points in zip(ids.tolist(), p_values.tolist(), points_by_label(flat_id, ids))
    ]
    rows.sort(key=table_order)
    return CorrectionResult(
        method="cluster",
        p_corrected=p_map,
        mask=p_map <= alpha,
        threshold=critical_value(null_max, alpha),
        threshold_kind="cluster",
        maps={"cluster_id": cluster_id},
        clusters=rows,
        null=null_max,
        settings={
            "threshold": float(threshold),
            "dims": list(dims),
            "cluster_stat": cluster_stat,
            "min_supra_neighbors": int(min_supra_neighbors),
            "tail": tail,
            "alpha": float(alpha),
            "n_rows": int(null_max.size),
        },
    )


def _check_axes(shape, channels, freqs, times):
    if (len(channels), len(freqs), len(times)) != tuple(shape):
        raise ValueError(
            f"observed map of shape {shape} does not match {len(channels)} channels, "
            f"{len(freqs)} frequencies and {len(times)} times"
        )


def points_by_label(flat_labels, ids):
    """Flat indices of the points of each label in ``ids`` (one int array each, in memory order)."""
    order = np.argsort(flat_labels, kind="stable")
    grouped = flat_labels[order]
    starts = np.searchsorted(grouped, ids, side="left")
    stops = np.searchsorted(grouped, ids, side="right")
    return [order[start:stop] for start, stop in zip(starts, stops)]


def table_order(row):
    """Sort key of cluster-table rows: by p, then descending statistic, positive before negative, by number."""
    return row["p"], -row["statistic"], row["id"] < 0, abs(row["id"])


def cluster_row(cluster, statistic, p, where, stat, channels, freqs, times):
    """One row of the cluster table (keys ``CLUSTER_COLUMNS``).

    ``where`` = (channel, freq, time) index arrays of the cluster's points in
    ``stat`` (n_channels, n_freqs, n_times); ``freqs`` in Hz, ``times`` in s.
    """
    values = stat[where]
    peak = int(np.argmax(np.abs(values)))
    freqs, times = np.asarray(freqs, dtype=float), np.asarray(times, dtype=float)
    return {
        "id": int(cluster),
        "sign": "positive" if cluster > 0 else "negative",
        "statistic": float(statistic),
        "p": float(p),
        "n_points": int(values.size),
        "channels": ",".join(channels[c] for c in np.unique(where[0])),
        "time_start_ms": _ms(times[where[2]].min()),
        "time_end_ms": _ms(times[where[2]].max()),
        "freq_low_hz": _hz(freqs[where[1]].min()),
        "freq_high_hz": _hz(freqs[where[1]].max()),
        "peak_stat": float(values[peak]),
        "peak_channel": channels[where[0][peak]],
        "peak_freq_hz": _hz(freqs[where[1][peak]]),
        "peak_time_ms": _ms(times[where[2][peak]]),
    }


def _ms(seconds) -> float:
    """Seconds -> ms, rounded to a microsecond (drops float noise such as 300.00000000000006)."""
    return round(1e3 * float(seconds), 3)


def _hz(value) -> float:
    return round(float(value), 6)


def write_cluster_table(path_tsv, clusters, *, sidecar=CLUSTER_SIDECAR, voltage=False):
    """Write the cluster table as TSV with a JSON sidecar (same stem, ``.json``) describing each column.

    Parameters
    ----------
    path_tsv : str or Path
        Output ``.tsv`` path; both files are written atomically.
    clusters : list of dict
        Rows with the keys ``CLUSTER_COLUMNS`` (as ``cluster_inference`` gives them).
    sidecar : dict
        Column descriptions (``CLUSTER_SIDECAR``, or the TFCE regions' own).
    voltage : bool
        A voltage map's table (`famwise.axes.is_voltage`): no frequency columns, points are (channel, time).
    """
    path_tsv = os.fspath(path_tsv)
    columns = [c for c in CLUSTER_COLUMNS if not (voltage and c in FREQUENCY_COLUMNS)]
    if voltage:
        sidecar = {key: value for key, value in sidecar.items() if key not in FREQUENCY_COLUMNS}
        described = sidecar["n_points"]["Description"].replace("(channel, frequency, time)", "(channel, time)")
        sidecar["n_points"] = {**sidecar["n_points"], "Description": described}
    lines = ["\t".join(columns)]
    for row in clusters:
        lines.append("\t".join(_format_cell(row[name]) for name in columns))
    write_text(path_tsv, "\n".join(lines) + "\n")
    stem = path_tsv[:-4] if path_tsv.endswith(".tsv") else path_tsv
    write_text(stem + ".json", json.dumps(sidecar, indent=2) + "\n")


def _format_cell(value):
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else "n/a"
    return str(value)
