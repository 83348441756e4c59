"""The result every correction returns."""

from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class CorrectionResult:
    """Outcome of one multiple-comparison correction on one contrast.

    Attributes
    ----------
    method : str
        Correction method name as in the spec (e.g. ``"holm"``).
    p_corrected : ndarray of float, shape of the tested points
        Adjusted (corrected) p per point; for cluster inference the p of the
        cluster a point belongs to, 1 outside clusters.
    mask : ndarray of bool, same shape
        True where the point is significant at the method's level.
    threshold : float or None
        The corrected threshold where the method has one: the largest p
        declared significant (Holm, Hochberg, BH, BY), the per-test level
        (Bonferroni, Sidak), the critical |stat| (max-statistic), the critical
        cluster statistic or TFCE value. None when nothing defines one.
    threshold_kind : str
        What ``threshold`` is: ``"p"``, ``"stat"``, ``"cluster"``, ``"tfce"``.
    maps : dict of str to ndarray
        Extra per-point maps to save, e.g. ``{"tfce": ...}`` or
        ``{"cluster_id": ...}`` (int, 0 = none, >0 positive, <0 negative).
    clusters : list of dict
        One row per cluster (cluster methods only), see ``famwise.correct.clusters``.
    null : ndarray or None
        The permutation null the inference used (per-permutation maxima), so a
        user can check it; None for parametric procedures.
    settings : dict
        The parameters the method ran with (for the report and methods text).
    """

    method: str
    p_corrected: np.ndarray
    mask: np.ndarray
    threshold: float | None = None
    threshold_kind: str = "p"
    maps: dict[str, np.ndarray] = field(default_factory=dict)
    clusters: list[dict] = field(default_factory=list)
    null: np.ndarray | None = None
    settings: dict = field(default_factory=dict)

    @property
    def n_significant(self) -> int:
        """Number of significant points."""
        return int(np.count_nonzero(self.mask))
