"""Significant regions of a TFCE result: the table a researcher reports.

TFCE gives a corrected p per point. Its significant points are grouped into
connected regions, positive and negative apart, on the same product
neighborhood the enhancement used (channel graph x frequency x time, limited
to ``dims``). Each region is one row of a table with the columns of the
cluster table (``famwise.correct.clusters.CLUSTER_COLUMNS``): its statistic
is the largest |TFCE| in it and its p the smallest corrected p in it (the p
at that peak). The regions carry no inference of their own: they describe
where the point-wise TFCE result lies.

References
----------
Smith SM, Nichols TE (2009). Threshold-free cluster enhancement: addressing
problems of smoothing, threshold dependence and localisation in cluster
inference. NeuroImage 44(1):83-98.
"""

import numpy as np

from famwise.correct.clusters import CLUSTER_SIDECAR, DIMS, cluster_row, label_clusters, points_by_label, table_order

REGION_SIDECAR = CLUSTER_SIDECAR | {
    "id": {
        "Description": "Region number as in the cluster_id map: positive regions 1, 2, ..., negative "
        "regions -1, -2, ..., each numbered by descending peak |TFCE|. A region is a "
        "connected set of points significant after TFCE correction."
    },
    "sign": {
        "Description": "Sign of the statistic in the region.",
        "Levels": {"positive": "stat > 0", "negative": "stat < 0"},
    },
    "statistic": {"Description": "Largest |TFCE| value in the region."},
    "p": {
        "Description": "Smallest TFCE-corrected p in the region (the p at its TFCE peak): the share of "
        "permutations (identity included) whose largest |TFCE| reaches it."
    },
    "n_points": {"Description": "Number of significant (channel, frequency, time) points in the region."},
}


def significant_regions(enhanced, p_corrected, mask, stat, *, indptr, indices, dims=DIMS, channels, freqs, times):
    """Connected regions of the significant points, numbered by descending peak |TFCE| within each sign.

    Parameters
    ----------
    enhanced : ndarray, shape (n_channels, n_freqs, n_times)
        Signed TFCE map.
    p_corrected : ndarray, same shape
        TFCE-corrected p per point.
    mask : ndarray of bool, same shape
        Significant points.
    stat : ndarray, same shape
        The statistic map (for each region's peak statistic).
    indptr, indices, dims
        The neighborhood the TFCE used.
    channels : list of str
        Channel names (n_channels).
    freqs, times : ndarray
        Frequencies in Hz (n_freqs) and times in s (n_times).

    Returns
    -------
    region_id : ndarray of int32, same shape
        0 outside the regions, +k / -k for the k-th positive / negative region.
    rows : list of dict
        One row per region (keys ``CLUSTER_COLUMNS``), by descending peak |TFCE|.
    """
    enhanced = np.asarray(enhanced, dtype=np.float64)
    significant = np.where(mask, enhanced, 0.0)
    labels, _ = label_clusters(
        significant, threshold=0.0, indptr=indptr, indices=indices, dims=dims, cluster_stat="size"
    )
    flat = labels.ravel()
    ids = np.unique(flat[flat != 0])
    magnitude, p_flat = np.abs(enhanced).ravel(), np.asarray(p_corrected, dtype=np.float64).ravel()
    regions = [
        (ident, float(magnitude[points].max()), float(p_flat[points].min()), points)
        for ident, points in zip(ids.tolist(), points_by_label(flat, ids))
    ]
    region_id = np.zeros(flat.size, np.int32)
    rows = []
    for sign in (1, -1):
        mine = sorted((r for r in regions if np.sign(r[0]) == sign), key=lambda r: (-r[1], r[3][0]))
        for k, (_, peak, p, points) in enumerate(mine, start=1):
            region_id[points] = sign * k
            rows.append(
                cluster_row(sign * k, peak, p, np.unravel_index(points, labels.shape), stat, channels, freqs, times)
            )
    rows.sort(key=table_order)
    return region_id.reshape(labels.shape), rows
