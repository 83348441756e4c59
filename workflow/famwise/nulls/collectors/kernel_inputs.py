"""Checked inputs of the cluster and TFCE kernels, shared by their collectors and their inference.

The grid of points is (n_channels, n_freqs, n_times), flattened in C order;
the channel graph is CSR (``indptr``, ``indices``), symmetric, without self
loops; ``dims`` names the dimensions clusters connect over.
"""

import math

import numpy as np

from famwise.errors import UserError

DIMS = ("channel", "freq", "time")
TAILS = {"two-sided": 0, "greater": 1, "less": 2}  # tail -> kernel code
CLUSTER_STATS = ("mass", "size")


def check_graph(shape, indptr, indices):
    """Validate the grid shape and channel graph; return (shape, indptr, indices) as kernel inputs."""
    if len(shape) != 3 or any(int(n) < 1 for n in shape):
        raise UserError(f"the map shape must be (n_channels, n_freqs, n_times) with positive sizes, got {shape}")
    n_ch = int(shape[0])
    indptr = np.ascontiguousarray(indptr, dtype=np.int32)
    indices = np.ascontiguousarray(indices, dtype=np.int32)
    if indptr.shape != (n_ch + 1,) or indptr[0] != 0 or indptr[-1] != len(indices) or np.any(np.diff(indptr) < 0):
        raise UserError(
            f"the channel neighbor graph must be CSR arrays for {n_ch} channels "
            f"(indptr of length {n_ch + 1}, from 0 to len(indices)), got indptr of length {len(indptr)}"
        )
    if len(indices) and (indices.min() < 0 or indices.max() >= n_ch):
        raise UserError(
            f"the channel neighbor graph names channel index {int(indices.max())} but there are {n_ch} channels"
        )
    rows = np.repeat(np.arange(n_ch), np.diff(indptr))
    if np.any(rows == indices):
        raise UserError(f"the channel neighbor graph has a self loop at channel {int(rows[rows == indices][0])}")
    edges = set(zip(rows.tolist(), indices.tolist()))
    missing = next(((a, b) for a, b in edges if (b, a) not in edges), None)
    if missing is not None:
        raise UserError(
            f"the channel neighbor graph is not symmetric: {missing[0]} -> {missing[1]} has no reverse edge"
        )
    return tuple(int(n) for n in shape), indptr, indices


def check_dims(dims):
    """Validate ``dims``; return (link_channel, link_freq, link_time)."""
    dims = tuple(dims)
    if not dims or len(set(dims)) != len(dims) or not set(dims) <= set(DIMS):
        raise UserError(f"cluster dims must be distinct names from {list(DIMS)}, got {list(dims)}")
    return "channel" in dims, "freq" in dims, "time" in dims


def tail_code(tail):
    """Validate ``tail``; return its kernel code."""
    if tail not in TAILS:
        raise UserError(f"tail must be one of {list(TAILS)}, got {tail!r}")
    return TAILS[tail]


def statistic_block(stats, shape):
    """A collector's block as C-contiguous float32 or float64 (n_rows, n_points of ``shape``).

    float32 stays float32 (the kernels promote each value exactly); other
    dtypes become float64. A block of another width raises ValueError.
    """
    stats = np.ascontiguousarray(stats)
    if stats.dtype not in (np.float32, np.float64):
        stats = stats.astype(np.float64)
    n_pts = math.prod(shape)
    if stats.ndim != 2 or stats.shape[1] != n_pts:
        raise ValueError(f"expected a block of shape (rows, {n_pts}), got {stats.shape}")
    return stats


def check_cluster_settings(threshold, cluster_stat, min_supra_neighbors):
    """Raise UserError unless the cluster-forming threshold, statistic and neighbor count are valid."""
    if not (math.isfinite(threshold) and threshold >= 0):
        raise UserError(f"the cluster-forming threshold must be a finite statistic value >= 0, got {threshold}")
    if cluster_stat not in CLUSTER_STATS:
        raise UserError(f"cluster_stat must be one of {list(CLUSTER_STATS)}, got {cluster_stat!r}")
    if int(min_supra_neighbors) != min_supra_neighbors or min_supra_neighbors < 0:
        raise UserError(f"min_supra_neighbors must be a whole number >= 0, got {min_supra_neighbors}")


INFINITE_STATISTIC = (
    "the statistic map has infinite values (a point with zero variance across subjects?); TFCE needs finite statistics"
)


def check_tfce_settings(E, H, step):
    """Raise UserError unless E, H and step are valid; return the kernel's step code (-1.0 for exact)."""
    if not (math.isfinite(E) and E > 0):
        raise UserError(f"TFCE extent exponent E must be a finite number > 0, got {E}")
    if not (math.isfinite(H) and H >= 0):
        raise UserError(f"TFCE height exponent H must be a finite number >= 0, got {H}")
    if step is not None and not (math.isfinite(step) and step > 0):
        raise UserError(f"TFCE step must be a positive statistic value or None (exact), got {step}")
    return -1.0 if step is None else float(step)
