"""Bench: the Freedman-Lane regression null against the sign-flip max-|t| null, per permutation."""

import resource
import time

import numpy as np

from famwise.benchmarks import BenchRow
from famwise.naive.regression import freedman_lane_null
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import iter_null_blocks, run_shard
from famwise.nulls.tables import make_table

N_SUBJECTS = 24
N_POINTS = 288_000
BLOCK = 64


def _seconds(function) -> float:
    """Shortest wall time in s of two calls (the machine may be shared)."""
    times = []
    for _ in range(2):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def bench_regression_null(quick: bool) -> BenchRow:
    """Time the max-|t| regression null with 2 nuisance covariates against the sign-flip max-|t| null.

    24 subjects x 288,000 points; full run 1,000 table rows of each (quick:
    100), both through `famwise.nulls.engine.run_shard` with a max-|t|
    collector, each timed twice and the shorter time kept. The target is
    per permutation: the regression null within 3x of the sign-flip null. The
    naive per-row refit (`famwise.naive.regression`) runs on 2 rows: the bench
    stops if famwise's t differs from it, and the note gives its time,
    extrapolated, and the time of the bare float64 matrix product of the
    same weighted sums (numpy, no fixed summation order), the floor of any
    float64 implementation.
    """
    n_rows = 100 if quick else 1000
    rng = np.random.default_rng(0)
    x = rng.standard_normal((N_SUBJECTS, N_POINTS))
    age = rng.uniform(20, 70, N_SUBJECTS)
    nuisance = np.column_stack([np.arange(N_SUBJECTS) % 2, rng.standard_normal(N_SUBJECTS)]).astype(np.float64)
    regression = {"test": "regression", "covariate": age, "nuisance": nuisance}
    table = make_table("regression", n_subjects=N_SUBJECTS, permutations=n_rows - 1, seed=1)
    flips = make_table("one-sample", n_subjects=N_SUBJECTS, permutations=n_rows - 1, seed=1)

    def run(rows, **options):
        run_shard(x, rows, collectors=[MaxStatCollector(tail="two-sided")], block_size=BLOCK, **options)

    run(table.rows[:2], **regression)  # compile the kernels before timing
    run(flips.rows[:2], test="one-sample")
    famwise_s = _seconds(lambda: run(table.rows, **regression))
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    signflip_s = _seconds(lambda: run(flips.rows, test="one-sample"))
    weights = rng.standard_normal((BLOCK * (1 + nuisance.shape[1]), N_SUBJECTS))
    product = np.empty((weights.shape[0], N_POINTS))

    def matmul():
        for _ in range(0, n_rows, BLOCK):
            np.matmul(weights, x, out=product)

    matmul_s = _seconds(matmul)
    start = time.perf_counter()
    naive = freedman_lane_null(x, table.rows[1:3], covariate=age, nuisance=nuisance)
    naive_s = (time.perf_counter() - start) * n_rows / 2
    fast = next(iter_null_blocks(x, table.rows[1:3], **regression))
    worst = float(np.max(np.abs(fast - naive)))
    if worst > 1e-4 * max(1.0, float(np.max(np.abs(naive)))):
        raise RuntimeError(f"the regression null differs from the naive refit by {worst:.3g}")
    ratio = famwise_s / signflip_s
    return BenchRow(
        task="regression null vs sign-flip null",
        size=f"{N_SUBJECTS} subjects x {N_POINTS:,} points x {n_rows:,} permutations, 2 nuisance covariates",
        famwise_s=famwise_s,
        reference_s=signflip_s,
        target="<= 3x sign-flip",
        met=ratio <= 3,
        peak_memory_mb=peak_mb,
        slower_is_ratio=True,
        note=(
            f"Freedman-Lane {famwise_s / n_rows * 1e3:.2f} ms, sign flips {signflip_s / n_rows * 1e3:.2f} ms per "
            f"permutation ({ratio:.2f}x); the bare float64 product of the same sums, ({weights.shape[0]} x "
            f"{N_SUBJECTS}) @ ({N_SUBJECTS} x {N_POINTS:,}) per block of {BLOCK} rows, {matmul_s / n_rows * 1e3:.2f} ms "
            f"per permutation; naive per-row lstsq refit {naive_s:.0f} s (2 rows, extrapolated; largest "
            f"difference in t {worst:.1e})"
        ),
    )
