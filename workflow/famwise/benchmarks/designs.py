"""Bench: the between-groups max-F null against the naive recomputation, and beside the sign-flip max-|t| null."""

import time

import numpy as np

from famwise.benchmarks import BenchRow
from famwise.naive.stats import null_stats
from famwise.nulls.collectors.maxima import MaxStatCollector
from famwise.nulls.engine import iter_null_blocks, run_shard
from famwise.nulls.tables import make_table

N_SUBJECTS = 24
N_POINTS = 288_000
GROUPS = np.repeat([0, 1, 2], 8)
BLOCK = 64


def bench_between_groups_null(quick: bool) -> BenchRow:
    """Time the max-F null of three groups of 8 subjects x 288,000 points.

    Full run: 1,000 table rows (identity + 999 random relabellings); quick:
    100. famwise runs every row (`famwise.nulls.engine.run_shard` with a max
    collector). The naive reference (`famwise.naive.stats.null_stats`:
    relabel, then ``scipy.stats.f_oneway``) runs on the first 10 rows
    (quick: 3), extrapolated linearly, and must give famwise's maxima on
    those rows (else RuntimeError); target >= 10x. The note gives the
    time over the sign-flip max-|t| null of the same data and rows (one
    sum per row there, k - 1 group sums here).
    """
    n_rows = 100 if quick else 1000
    n_reference = 3 if quick else 10
    x = np.random.default_rng(0).standard_normal((N_SUBJECTS, N_POINTS))
    labels = make_table("between-groups", n_subjects=N_SUBJECTS, permutations=n_rows - 1, seed=1, groups=GROUPS)
    flips = make_table("one-sample", n_subjects=N_SUBJECTS, permutations=n_rows - 1, seed=1)

    def null(test, table, groups=None):
        start = time.perf_counter()
        run_shard(
            x,
            table.rows,
            collectors=[MaxStatCollector(tail="greater")],
            block_size=BLOCK,
            test=test,
            groups=groups,
        )
        return time.perf_counter() - start

    run_shard(
        x[:, :100], labels.rows[:2], collectors=[MaxStatCollector(tail="greater")], test="between-groups", groups=GROUPS
    )
    run_shard(x[:, :100], flips.rows[:2], collectors=[MaxStatCollector(tail="greater")], test="one-sample")
    famwise_s = null("between-groups", labels, GROUPS)
    sign_flip_s = null("one-sample", flips)
    start = time.perf_counter()
    reference = null_stats(x, labels.rows[:n_reference], test="between-groups", groups=GROUPS).max(axis=1)
    reference_s = (time.perf_counter() - start) * n_rows / n_reference
    fast = next(iter_null_blocks(x, labels.rows[:n_reference], test="between-groups", groups=GROUPS)).max(axis=1)
    if not np.allclose(fast, reference, rtol=2e-6):
        raise RuntimeError(f"max-F null: famwise {fast} differs from the reference {reference}")
    return BenchRow(
        task="max-F null, 3 groups",
        size=f"{N_SUBJECTS} subjects (3 groups of 8) x {N_POINTS:,} points x {n_rows:,} relabellings",
        famwise_s=famwise_s,
        reference_s=reference_s,
        target=">= 10x",
        met=reference_s / famwise_s >= 10,
        note=(
            f"reference: relabel + scipy.stats.f_oneway, run on {n_reference} of {n_rows} rows and extrapolated "
            f"linearly; famwise / sign-flip max-|t| null = {famwise_s / sign_flip_s:.1f}x"
        ),
    )
