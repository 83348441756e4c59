"""Bench: the sign-flip max-|t| null against the naive recomputation and the bare matrix product."""

import resource
import time

import numpy as np

from famwise.benchmarks import BenchRow
from famwise.naive.stats import null_stats
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import run_shard
from famwise.nulls.tables import make_table

N_SUBJECTS = 24
N_POINTS = 288_000
BLOCK = 64
REPEATS = 2


def _best_of(repeats, function) -> float:
    """Shortest wall time in s of ``repeats`` calls (the machine may be shared)."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def bench_maxt_null(quick: bool) -> list[BenchRow]:
    """Time the max-|t| sign-flip null of 24 subjects x 288,000 points.

    Full run: 1,000 table rows (identity + 999 random flips); quick: 100 rows.
    famwise runs every row (`famwise.nulls.engine.run_shard` with a max-|t|
    collector). The naive reference (`famwise.naive.stats.null_stats`:
    flip, then ``scipy.stats.ttest_1samp``, one permutation at a time) runs
    on the first 10 rows (quick: 3) and is extrapolated linearly. The bare
    matrix product is numpy float32 signs (rows x 24) @ data (24 x 288,000),
    computed in blocks of 64 rows into one reused output buffer. famwise and
    the product are each timed twice and the shorter time kept.

    Returns
    -------
    list of BenchRow
        Against the reference (target >= 30x) and against the matrix product
        (target famwise <= 3x the product's time).
    """
    n_rows = 100 if quick else 1000
    n_reference = 3 if quick else 10
    rng = np.random.default_rng(0)
    x = rng.standard_normal((N_SUBJECTS, N_POINTS)) + 0.1
    table = make_table("one-sample", n_subjects=N_SUBJECTS, permutations=n_rows - 1, seed=1)
    size = f"{N_SUBJECTS} subjects x {N_POINTS:,} points x {n_rows:,} sign flips"

    run_shard(x[:, :100], table.rows[:2], collectors=[MaxStatCollector(tail="two-sided")], test="one-sample")
    famwise_s = _best_of(
        REPEATS,
        lambda: run_shard(
            x, table.rows, collectors=[MaxStatCollector(tail="two-sided")], block_size=BLOCK, test="one-sample"
        ),
    )
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    x32 = x.astype(np.float32)
    signs = table.rows.astype(np.float32)
    out = np.empty((BLOCK, N_POINTS), dtype=np.float32)

    def matmul():
        for first in range(0, n_rows, BLOCK):
            block = signs[first : first + BLOCK]
            np.matmul(block, x32, out=out[: block.shape[0]])

    matmul_s = _best_of(REPEATS, matmul)

    start = time.perf_counter()
    ref = null_stats(x, table.rows[:n_reference], test="one-sample")
    np.abs(ref).max(axis=1)
    reference_s = (time.perf_counter() - start) * n_rows / n_reference

    over_matmul = famwise_s / matmul_s
    return [
        BenchRow(
            task="max-|t| null, sign flips",
            size=size,
            famwise_s=famwise_s,
            reference_s=reference_s,
            target=">= 30x",
            met=reference_s / famwise_s >= 30,
            peak_memory_mb=peak_mb,
            note=(
                f"reference run on {n_reference} of {n_rows} rows and extrapolated linearly; "
                f"famwise/matmul = {over_matmul:.2f}x; peak memory is the process's"
            ),
        ),
        BenchRow(
            task="max-|t| null vs bare matrix product",
            size=size,
            famwise_s=famwise_s,
            reference_s=matmul_s,
            target="<= 3x the matmul",
            met=over_matmul <= 3,
            slower_is_ratio=True,
            note=(
                f"famwise/matmul = {over_matmul:.2f}x; matmul: numpy float32 ({n_rows} x {N_SUBJECTS}) @ "
                f"({N_SUBJECTS} x {N_POINTS}) in blocks of {BLOCK} rows into a reused buffer"
            ),
        ),
    ]
