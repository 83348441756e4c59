"""How a permutation shard gathers what the corrections need.

A null shard runs the study's statistic over a range of rows of the
permutation table, block by block, and hands each block to every collector.
A collector keeps only what its correction needs (per-permutation maxima,
per-point exceedance counts), never the permutation maps themselves.

Collector arrays merge across shards by their key: keys ending in ``.count``
are added, every other key is concatenated along axis 0 in shard order, so
the merged null is the same whatever the number of shards.
"""

from typing import Protocol

import numpy as np


class NullCollector(Protocol):
    """What a null shard asks of each correction."""

    def update(self, stats: np.ndarray) -> None:
        """Take the statistic maps of consecutive table rows.

        Parameters
        ----------
        stats : ndarray, shape (n_rows_in_block, n_points)
            The statistic of each row of the block, rows in table order,
            points flattened in C order from (n_channels, n_freqs, n_times).
        """

    def arrays(self) -> dict[str, np.ndarray]:
        """Arrays to store in the shard file (keys ``<key>.<what>``)."""


def merge_shard_arrays(shards: list[dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    """Merge the collector arrays of several shards, given in shard order.

    Keys ending in ``.count`` are summed; all others are concatenated along
    axis 0.
    """
    if not shards:
        raise ValueError("no shards to merge")
    keys = shards[0].keys()
    merged = {}
    for key in keys:
        parts = [shard[key] for shard in shards]
        if key.endswith(".count"):
            merged[key] = np.sum(parts, axis=0)
        else:
            merged[key] = np.concatenate(parts, axis=0)
    return merged
