"""Benchmark: Westfall-Young step-down max-statistic from shard blocks vs the brute force holding all maps."""

import time
import tracemalloc

import numpy as np

from famwise.benchmarks import BenchRow
from famwise.correct.maxstat import step_down
from famwise.naive.stepdown import step_down_reference
from famwise.nulls.collectors.maxima import StepDownCollector
from famwise.nulls.engine import iter_null_blocks

_N_SUBJECTS = 24
_BLOCK_ROWS = 64


def bench_stepdown(quick: bool) -> BenchRow:
    """Time the step-down max-statistic on sign-flip t maps, famwise against the reference.

    Full size: 24 subjects x 288,000 points x 1,000 sign-flip rows (identity
    included). Quick: 24 subjects x 28,800 points x 200 rows.

    famwise computes the t maps in blocks of 64 rows with the pipeline's
    permutation engine and streams them through ``StepDownCollector`` and
    ``step_down``. The reference computes the t map of each sign flip one at
    a time with the textbook formula (mean over SD with ddof 1), holds all of
    them, and runs ``famwise.naive.stepdown``, which walks the points one
    by one. At full size the reference runs on a tenth of the points (its
    maps alone would take 2.3 GB) and its time is scaled up linearly in the
    number of points. On that subset both step-downs are also timed alone on
    the same maps, and must give identical adjusted p.

    Parameters
    ----------
    quick : bool
        Run the small size.

    Returns
    -------
    BenchRow
    """
    n_points, n_rows = (28_800, 200) if quick else (288_000, 1_000)
    n_subset = n_points if quick else n_points // 10
    rng = np.random.default_rng(20260101)
    data = rng.standard_normal((_N_SUBJECTS, n_points))
    data[:, : n_points // 20] += 0.8  # a block of true effects so that some points are significant
    flips = rng.choice(np.array([-1.0, 1.0]), size=(n_rows, _N_SUBJECTS))
    flips[0] = 1.0

    _step_down_from_blocks(_t_blocks(data[:, :100], flips[:2]), 2)  # compile (or load) the kernel first
    tracemalloc.start()
    start, start_cpu = time.perf_counter(), time.process_time()
    famwise_full = _step_down_from_blocks(_t_blocks(data, flips), n_rows)
    famwise_s, famwise_cpu = time.perf_counter() - start, time.process_time() - start_cpu
    peak_mb = tracemalloc.get_traced_memory()[1] / 1e6
    tracemalloc.stop()

    subset = np.ascontiguousarray(data[:, :n_subset])
    start, start_cpu = time.perf_counter(), time.process_time()
    naive_maps = _t_maps_one_by_one(subset, flips)
    step_down_reference(naive_maps, naive_maps[0], tail="two-sided")
    reference_subset_s, reference_subset_cpu = time.perf_counter() - start, time.process_time() - start_cpu
    del naive_maps

    # The step-down alone, both sides given the same maps of the subset; the results must agree bit for bit.
    maps = np.concatenate([block.copy() for block in _t_blocks(subset, flips)])
    start = time.perf_counter()
    famwise_subset = _step_down_from_blocks(np.array_split(maps, range(_BLOCK_ROWS, n_rows, _BLOCK_ROWS)), n_rows)
    famwise_alone_s = time.perf_counter() - start
    start = time.perf_counter()
    reference_subset = step_down_reference(maps, maps[0], tail="two-sided")
    reference_alone_s = time.perf_counter() - start
    if not np.array_equal(famwise_subset.p_corrected, reference_subset):
        raise AssertionError("famwise step-down differs from the reference on the benchmark subset")

    scale = n_points / n_subset
    reference_s = reference_subset_s * scale
    ratio = reference_s / famwise_s
    reference_cpu = reference_subset_cpu * scale
    note = (
        f"CPU time (all threads): famwise {famwise_cpu:.1f} s, reference {reference_cpu:.1f} s "
        f"({reference_cpu / famwise_cpu:.1f}x); "
        f"{famwise_full.n_significant} significant points; both sides include computing the t maps "
        f"(famwise: the permutation engine, float32 blocks of {_BLOCK_ROWS} flips; reference: one flip at a "
        f"time, float64); "
        f"step-down alone on {n_subset:,} points given the same maps: famwise {famwise_alone_s:.2f} s, "
        f"reference {reference_alone_s:.2f} s ({reference_alone_s / famwise_alone_s:.1f}x), identical adjusted p"
    )
    if scale != 1:
        note += f"; reference run on {n_subset:,} of {n_points:,} points, time scaled x{scale:g} (linear in points)"
    return BenchRow(
        task="step-down max-|t| (Westfall-Young)",
        size=f"{_N_SUBJECTS} subjects x {n_points:,} points x {n_rows:,} sign flips",
        famwise_s=famwise_s,
        reference_s=reference_s,
        target=">= 10x",
        met=ratio >= 10,
        peak_memory_mb=peak_mb,
        note=note,
    )


def _step_down_from_blocks(blocks, n_rows):
    """Step-down result from consecutive t-map blocks streamed through the collector."""
    collector = None
    for block in blocks:
        if collector is None:
            observed = block[0].copy()  # row 0 is the identity: the observed map, bit for bit
            collector = StepDownCollector(observed, tail="two-sided")
        collector.update(block)
    counts = collector.arrays()["stepdown.count"]
    return step_down(observed, counts, n_rows, tail="two-sided", alpha=0.05)


def _t_blocks(data, flips):
    """One-sample t maps (rows, n_points), float32, of sign-flipped ``data`` (n_subjects, n_points), block
    by block: the permutation engine of the pipeline's null jobs (`famwise.nulls.engine.iter_null_blocks`)."""
    yield from iter_null_blocks(
        data, flips.astype(np.int8), test="one-sample", block_size=_BLOCK_ROWS, reuse_output=True
    )


def _t_maps_one_by_one(data, flips):
    """All one-sample t maps (n_flips, n_points), one sign flip at a time (the naive way)."""
    n = data.shape[0]
    maps = np.empty((flips.shape[0], data.shape[1]))
    for row, flip in enumerate(flips):
        flipped = data * flip[:, None]
        maps[row] = flipped.mean(axis=0) / (flipped.std(axis=0, ddof=1) / np.sqrt(n))
    return maps
