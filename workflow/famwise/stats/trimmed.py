"""Trimmed means and Winsorized variances along the subject axis (Yuen's test).

The number trimmed from each tail is g = floor(trim * n); h = n - 2g values
remain.

References
----------
Yuen KK (1974). The two-sample trimmed t for unequal population variances.
Biometrika 61(1):165-170.
Tukey JW, McLaughlin DH (1963). Less vulnerable confidence and significance
procedures for location based on a single sample: trimming/Winsorization 1.
Sankhya A 25:331-352.
"""

import numpy as np


def n_trimmed(n: int, trim: float) -> int:
    """Number of values trimmed from each tail, g = floor(trim * n)."""
    return int(trim * n)


def trimmed_mean_and_winsorized_var(x: np.ndarray, trim: float) -> tuple[np.ndarray, np.ndarray, int]:
    """Trimmed mean and Winsorized variance (ddof 1) of each column.

    Parameters
    ----------
    x : ndarray, shape (n, P)
        Subjects in rows.
    trim : float
        Proportion trimmed from each tail, 0 <= trim < 0.5.

    Returns
    -------
    mean_t : ndarray, shape (P,)
        Mean of the h = n - 2g middle values.
    var_w : ndarray, shape (P,)
        Variance (ddof 1) of the Winsorized sample (the g lowest values set
        to the (g+1)-th lowest, the g highest to the (g+1)-th highest).
    h : int
        Number of values left after trimming.
    """
    n = x.shape[0]
    g = n_trimmed(n, trim)
    s = np.sort(x, axis=0)
    mean_t = s[g : n - g].mean(axis=0)
    w = np.clip(s, s[g], s[n - g - 1])
    return mean_t, w.var(axis=0, ddof=1), n - 2 * g


def one_sample_yuen(x: np.ndarray, trim: float) -> tuple[np.ndarray, np.ndarray, float]:
    """One-sample trimmed t against 0, per column.

    Standard error s_w / ((1 - 2 trim) sqrt(n)) (Tukey & McLaughlin 1963; the
    form of Wilcox's textbook, the same as
    ``scipy.stats.mstats.trimmed_stde``), df = h - 1.

    Returns
    -------
    t : ndarray, shape (P,)
    mean_t : ndarray, shape (P,)
        Trimmed mean.
    df : float
    """
    n = x.shape[0]
    mean_t, var_w, h = trimmed_mean_and_winsorized_var(x, trim)
    se = np.sqrt(var_w) / ((1.0 - 2.0 * trim) * np.sqrt(n))
    return mean_t / se, mean_t, float(h - 1)


def two_sample_yuen(
    a: np.ndarray, b: np.ndarray, trim: float, equal_var: bool
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Two-sample trimmed t (group a minus group b), per column.

    With d_j = (n_j - 1) s_wj^2 / (h_j (h_j - 1)), Yuen's statistic is
    (mean_ta - mean_tb) / sqrt(d_a + d_b) with Welch-type df
    (``equal_var=False``, Yuen 1974). ``equal_var=True`` pools the scaled
    Winsorized variances like Student's t with df = h_a + h_b - 2 (the
    default of ``scipy.stats.ttest_ind(..., trim=...)``).

    Returns
    -------
    t : ndarray, shape (P,)
    diff : ndarray, shape (P,)
        Difference of trimmed means.
    df : ndarray, shape () pooled or (P,) Welch-type
    """
    ma, va, ha = _scaled(a, trim)
    mb, vb, hb = _scaled(b, trim)
    diff = ma - mb
    if equal_var:
        df = np.asarray(float(ha + hb - 2))
        pooled = ((ha - 1) * va + (hb - 1) * vb) / df
        se = np.sqrt(pooled * (1.0 / ha + 1.0 / hb))
    else:
        da, db = va / ha, vb / hb
        se = np.sqrt(da + db)
        df = (da + db) ** 2 / (da**2 / (ha - 1) + db**2 / (hb - 1))
    return diff / se, diff, df


def _scaled(x: np.ndarray, trim: float) -> tuple[np.ndarray, np.ndarray, int]:
    """Trimmed mean, (n-1) s_w^2 / (h-1), and h."""
    n = x.shape[0]
    mean_t, var_w, h = trimmed_mean_and_winsorized_var(x, trim)
    return mean_t, var_w * (n - 1) / (h - 1), h
