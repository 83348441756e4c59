"""The one-way between-subject F of three or more groups, and the check of its group labels.

x (n, P) holds one value per subject and point; ``groups`` int (n,) labels
the subjects 0 .. k - 1 (k >= 3). With grand-mean-centred values y and group
sums S_g over n_g subjects,

    SS_between = sum_g S_g^2 / n_g,  SS_within = sum_i y_i^2 - SS_between,
    F = (SS_between / (k - 1)) / (SS_within / (n - k)),  df (k - 1, n - k).

Reference: Fisher RA (1925). Statistical Methods for Research Workers.
Oliver and Boyd, Edinburgh (the analysis of variance).
"""

import numpy as np

from famwise.errors import UserError

MIN_GROUPS = 3
MIN_PER_GROUP = 2
"""Fewest subjects per group: each group then has its own within-group variance."""


def check_group_labels(groups, n: int, min_per_group: int = MIN_PER_GROUP) -> np.ndarray:
    """Labels 0 .. k - 1 (k >= 3), each group with at least ``min_per_group`` subjects; int64 (n,)."""
    if groups is None:
        raise UserError("the between-groups test needs `groups` (one label 0 .. k - 1 per subject)")
    groups = np.asarray(groups)
    if groups.shape != (n,):
        raise UserError(f"`groups` must hold one label per subject ({n}), got shape {groups.shape}")
    k = int(groups.max()) + 1 if groups.size else 0
    if set(np.unique(groups).tolist()) != set(range(k)) or k < MIN_GROUPS:
        raise UserError(
            f"`groups` must hold the labels 0 .. k - 1 with k >= {MIN_GROUPS}, found {sorted(set(groups.tolist()))}"
        )
    groups = groups.astype(np.int64)
    sizes = np.bincount(groups, minlength=k)
    small = np.flatnonzero(sizes < min_per_group)
    if small.size:
        g = int(small[0])
        raise UserError(
            f"group {g} has {int(sizes[g])} subject{'' if sizes[g] == 1 else 's'}; "
            f"the between-groups test needs at least {min_per_group} per group"
        )
    return groups


def between_groups_f(x: np.ndarray, groups: np.ndarray):
    """F, df (2,), range of the group means and eta squared per point.

    Parameters
    ----------
    x : ndarray of float64, shape (n, P)
    groups : ndarray of int, shape (n,), labels 0 .. k - 1

    Returns
    -------
    f : ndarray (P,)
    df : ndarray (2,), (k - 1, n - k)
    effect : ndarray (P,), largest minus smallest group mean
    eta_squared : ndarray (P,), SS_between / SS_total
    """
    n = x.shape[0]
    k = int(groups.max()) + 1
    centred = x - x.mean(axis=0)
    means = np.stack([x[groups == g].mean(axis=0) for g in range(k)])
    sizes = np.bincount(groups, minlength=k)
    ss_between = sum(sizes[g] * (means[g] - x.mean(axis=0)) ** 2 for g in range(k))
    ss_total = np.sum(centred**2, axis=0)
    ss_within = np.maximum(ss_total - ss_between, 0.0)
    df = np.array([k - 1.0, n - float(k)])
    f = (ss_between / df[0]) / (ss_within / df[1])
    return f, df, means.max(axis=0) - means.min(axis=0), ss_between / ss_total
