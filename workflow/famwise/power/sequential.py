"""A permutation null that stops feeding a correction once its decision at alpha is settled.

For the max-statistic (single-step and step-down), cluster and TFCE
corrections, a point's p is count / R: the share of the R table rows
(identity included) whose largest null value reaches the point's value.
No point's value exceeds the identity row's own largest value m_0, so no
count is below c(m_0), and counts only grow as rows are added. Once more
than alpha R rows reach m_0, no point of the map can reach p <= alpha,
whatever the remaining rows hold: the correction declares nothing, as the
full table would. The runner then stops feeding that correction's
collectors and stands in +inf for the maxima of the rows it did not
compute (and adds those rows to every step-down count), which can only
raise each p, so the decision stays "nothing significant" and every mask
is identical to the full table's. The rows are compared with m_0 + 1e-6 |m_0|,
so that the corrections' own tie tolerance (a relative 1e-9 for cluster
and TFCE) can only count more rows than the runner did. Corrections that
still may declare something run every row, so their masks, regions
recovered and false positives are the full table's.

This is a curtailed test in the sense of Besag & Clifford (1991), used here
only where curtailing cannot change the decision of the full test.

References
----------
Besag J, Clifford P (1991). Sequential Monte Carlo p-values. Biometrika
78(2):301-304.
"""

import numpy as np

from famwise.nulls.engine import iter_null_blocks

MARGIN = 1e-6
"""Margin, relative to |m_0|, above the identity's largest value m_0 a row must reach to count."""


class SettledRunner:
    """Drop-in for `famwise.nulls.engine.run_shard` over a whole table, curtailed per correction.

    Parameters
    ----------
    alpha : float
        The level the corrections decide at.

    Attributes
    ----------
    rows_used : dict of str to int
        After a call: rows fed to each correction's collectors (key ->
        rows, identity included).
    """

    def __init__(self, alpha: float):
        self.alpha = float(alpha)
        self.rows_used: dict[str, int] = {}

    def __call__(
        self, x, rows, *, collectors, block_size=64, screen=None, **statistic_options
    ) -> dict[str, np.ndarray]:
        total = rows.shape[0]
        active = list(collectors)
        stopped: dict[str, int] = {}
        seen = 0
        for stats in iter_null_blocks(x, rows, block_size=block_size, reuse_output=True, **statistic_options):
            if screen is not None:
                stats = screen(stats)
            for collector in active:
                collector.update(stats)
            seen += stats.shape[0]
            if seen < total:
                for key in self._settled(active, total):
                    stopped[key] = seen
                active = [c for c in active if _key_of(c) not in stopped]
        arrays = {}
        for collector in collectors:
            for name, value in collector.arrays().items():
                key, what = name.rsplit(".", 1)
                if key in stopped and what == "max":
                    value = np.concatenate([value, np.full(total - value.size, np.inf)])
                elif key in stopped and what == "count" and key != "exceed":
                    value = value + (total - stopped[key])
                arrays[name] = value
        self.rows_used = {_key_of(c): stopped.get(_key_of(c), total) for c in collectors}
        return arrays

    def _settled(self, active, total: int) -> list[str]:
        """Keys of max-type corrections that can no longer declare anything."""
        settled = []
        for collector in active:
            found = collector.arrays()
            key = _key_of(collector)
            maxima = found.get(f"{key}.max")
            if maxima is None or key in settled:
                continue
            reached = 1 + int(np.count_nonzero(maxima[1:] >= maxima[0] + MARGIN * abs(maxima[0])))
            if reached > self.alpha * total:
                settled.append(key)
        return settled


def _key_of(collector) -> str:
    """The correction key a collector writes under (``<key>.max`` / ``<key>.count``)."""
    return next(iter(collector.arrays())).rsplit(".", 1)[0]
