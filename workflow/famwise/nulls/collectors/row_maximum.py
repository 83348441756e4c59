"""What the cluster and TFCE null collectors share: one maximum per table row from a numba kernel over the graph."""

from abc import ABC, abstractmethod

import numpy as np

from famwise.kernels._jit import thread_count
from famwise.nulls.collectors.kernel_inputs import statistic_block
from famwise.nulls.screen import infinite_rows


class RowMaximumCollector(ABC):
    """Base of the collectors that keep one float64 maximum per table row.

    A subclass sets ``_shape`` (n_channels, n_freqs, n_times) and ``_key``, and
    supplies ``_new_workspace(n_chunks, n_points)`` (the kernel's scratch
    arrays, allocated at the first block and reused) and
    ``_run_kernel(stats, n_chunks, workspace, out)`` (fills ``out``, float64
    (n_rows_in_block,), with each row's maximum). Each row's value depends on
    that row alone, so any block split gives the same array.
    """

    _shape: tuple[int, int, int]
    _key: str

    def __init__(self):
        self._parts = []
        self._workspace = None
        self._workspace_chunks = 0

    def update(self, stats):
        """Take the statistic maps (n_rows_in_block, n_points), float32 or float64, of consecutive table rows."""
        stats, infinite = infinite_rows(statistic_block(stats, self._shape))
        out = np.empty(stats.shape[0])
        if stats.shape[0]:
            n_chunks = min(stats.shape[0], thread_count())
            if self._workspace_chunks < n_chunks:  # reused by every block
                self._workspace = self._new_workspace(n_chunks, stats.shape[1])
                self._workspace_chunks = n_chunks
            self._run_kernel(stats, n_chunks, self._workspace, out)
            if infinite is not None:  # a point degenerate only after permutation: more extreme than any observed value
                out[infinite] = np.inf
        self._parts.append(out)

    def arrays(self):
        """``{"<key>.max": float64 (n_rows,)}`` in row order."""
        return {f"{self._key}.max": np.concatenate(self._parts) if self._parts else np.empty(0)}

    @abstractmethod
    def _new_workspace(self, n_chunks: int, n_points: int) -> tuple:
        """The kernel's scratch arrays for ``n_chunks`` parallel rows of ``n_points`` points."""

    @abstractmethod
    def _run_kernel(self, stats, n_chunks: int, workspace: tuple, out: np.ndarray) -> None:
        """Fill ``out`` (n_rows_in_block,) with the maximum of each row of ``stats``."""
