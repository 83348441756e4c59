"""Brute-force Westfall-Young step-down with every permutation map held in memory.

The oracle for ``famwise.nulls.collectors.maxima.StepDownCollector`` + ``step_down``
and the baseline of the step-down benchmark. It walks the points one at a
time from the least significant upward, keeping the successive maximum of
every permutation row, exactly as the algorithm is written out in Westfall &
Young (1993); it needs the whole (n_rows, n_points) null in memory.
"""

import numpy as np


def step_down_reference(null_stats, observed_stat, *, tail):
    """Step-down adjusted p-values from all permutation maps.

    Parameters
    ----------
    null_stats : ndarray of float, shape (n_rows, n_points)
        The statistic of every permutation-table row, identity (row 0) included.
    observed_stat : ndarray of float, shape (n_points,)
        The observed statistic.
    tail : {"two-sided", "greater", "less"}
        Work on |stat|, stat or -stat.

    Returns
    -------
    ndarray of float, shape (n_points,)
        Adjusted p per point. Points are ranked by the transformed observed
        statistic, most significant first, ties in index order.

    References
    ----------
    Westfall PH, Young SS (1993). Resampling-Based Multiple Testing. Wiley.
    """
    transform = {"two-sided": np.abs, "greater": np.asarray, "less": np.negative}[tail]
    null = transform(np.asarray(null_stats, dtype=float))
    observed = transform(np.asarray(observed_stat, dtype=float))
    n_rows, n_points = null.shape
    order = sorted(range(n_points), key=lambda point: -observed[point])  # Python's sort is stable
    raw = np.empty(n_points)
    successive_max = np.full(n_rows, -np.inf)
    for rank in range(n_points - 1, -1, -1):
        point = order[rank]
        successive_max = np.maximum(successive_max, null[:, point])
        raw[rank] = np.count_nonzero(successive_max >= observed[point]) / n_rows
    adjusted = np.empty(n_points)
    running = 0.0
    for rank in range(n_points):
        running = max(running, raw[rank])
        adjusted[order[rank]] = running
    return adjusted
