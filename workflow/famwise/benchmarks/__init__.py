"""`famwise bench`: famwise's kernels timed against the naive references in one run."""

from dataclasses import dataclass


@dataclass(frozen=True)
class BenchRow:
    """One row of the benchmark table.

    Attributes
    ----------
    task : str
        What was timed, e.g. ``"max-|t| null"``.
    size : str
        The input size in words, e.g. ``"24 subjects x 288,000 points x 1,000 sign flips"``.
    famwise_s : float
        famwise's wall time in s for the whole task.
    reference_s : float
        The naive reference's wall time in s for the whole task (extrapolated
        linearly when ``extrapolated`` says so).
    target : str
        The target, e.g. ``">= 30x"``.
    met : bool or None
        Whether the target was met; None when the row was skipped.
    peak_memory_mb : float or None
        Peak resident memory of famwise's run in MB, when measured.
    note : str
        Anything the reader must know (extrapolation, per-permutation times,
        extra ratios).
    slower_is_ratio : bool
        True when the row compares famwise against a floor rather than a
        reference (the bare matrix product): its ratio is famwise time over
        that floor's time.
    """

    task: str
    size: str
    famwise_s: float
    reference_s: float
    target: str
    met: bool | None
    peak_memory_mb: float | None = None
    note: str = ""
    slower_is_ratio: bool = False

    @property
    def ratio(self) -> float:
        """Reference time over famwise time (famwise time over the floor's for ``slower_is_ratio`` rows)."""
        over, under = (self.famwise_s, self.reference_s) if self.slower_is_ratio else (self.reference_s, self.famwise_s)
        return over / under if under > 0 else float("inf")
