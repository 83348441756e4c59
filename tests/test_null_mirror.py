"""Mirror-image permutations tie exactly, in the null and in the p-values (the tie convention of famwise.nulls).

Flipping every sign negates a one-sample t or trimmed t, and swapping the two
groups of an equal-size split negates a two-sample t, Welch t or trimmed t,
in exact arithmetic (common practice, no source); under a two-sided tail the
two rows of each mirror pair must therefore count together.
"""

import numpy as np
import pytest

from famwise.correct.maxstat import single_step, step_down
from famwise.nulls.collectors.exceedance import ExceedanceCollector, permutation_p
from famwise.nulls.collectors.maxima import MaxStatCollector, StepDownCollector
from famwise.nulls.engine import iter_null_blocks, run_shard
from famwise.nulls.tables import make_table, smallest_attainable_p

N = 8
RNG = np.random.default_rng(15)
X = RNG.standard_normal((N, 500)) * np.exp(RNG.standard_normal(500)) + 0.3
GROUPS = np.repeat([0, 1], N // 2)
DESIGNS = {
    "one-sample t": dict(test="one-sample"),
    "paired yuen": dict(test="paired", statistic="yuen"),
    "two-sample t": dict(test="two-sample", groups=GROUPS),
    "two-sample welch": dict(test="two-sample", groups=GROUPS, equal_var=False),
    "two-sample yuen": dict(test="two-sample", groups=GROUPS, statistic="yuen"),
    "two-sample yuen welch": dict(test="two-sample", groups=GROUPS, statistic="yuen", equal_var=False),
}


def exact_table(options):
    """Every distinct resampling of the design (256 sign flips, 70 splits)."""
    return make_table(options["test"], n_subjects=N, permutations=10**6, seed=0, groups=options.get("groups"))


def mirror_rows(table, options):
    """Index of each row's mirror image: every sign flipped, or the two groups swapped."""
    if table.scheme == "sign-flip":
        keys = [row.tobytes() for row in table.rows]
        mirrored = [(-row).astype(np.int8).tobytes() for row in table.rows]
    else:
        labels = options["groups"][table.rows]  # label each subject takes in each row
        keys = [row.tobytes() for row in labels]
        mirrored = [(1 - row).tobytes() for row in labels]
    index = {key: i for i, key in enumerate(keys)}
    return np.array([index[key] for key in mirrored])


@pytest.mark.parametrize("name", DESIGNS)
def test_mirror_rows_negate_the_null_bit_for_bit(name):
    options = DESIGNS[name]
    table = exact_table(options)
    assert table.exact and table.n_mirrored == 1
    mirror = mirror_rows(table, options)
    assert (mirror[mirror] == np.arange(table.n_rows)).all() and (mirror != np.arange(table.n_rows)).all()
    null = np.concatenate(list(iter_null_blocks(X, table.rows, block_size=48, **options)))
    assert np.isfinite(null).all()
    assert null[mirror].tobytes() == (-null).tobytes()


@pytest.mark.parametrize("name", DESIGNS)
def test_mirror_rows_count_together_in_every_two_sided_p(name):
    options = DESIGNS[name]
    table = exact_table(options)
    mirror = mirror_rows(table, options)
    observed = next(iter_null_blocks(X, table.rows[:1], **options))[0].astype(np.float64)  # the identity row
    collectors = [
        ExceedanceCollector(observed, tail="two-sided"),
        MaxStatCollector(tail="two-sided"),
        StepDownCollector(observed, tail="two-sided"),
    ]
    arrays = run_shard(X, table.rows, collectors=collectors, block_size=48, **options)
    n_rows = table.n_rows
    # every mirror pair reaches the observed value together: counts are even, p a multiple of 2 / n_rows
    assert (arrays["exceed.count"] % 2 == 0).all()
    p = permutation_p(arrays["exceed.count"], n_rows)
    assert p.min() >= smallest_attainable_p(table, tail="two-sided") == 2 / n_rows
    max_null = arrays["maxstat.max"]
    assert max_null[mirror].tobytes() == max_null.tobytes()
    single = single_step(observed, max_null, tail="two-sided").p_corrected * n_rows
    assert (single == np.rint(single)).all() and (np.rint(single) % 2 == 0).all()
    assert (arrays["stepdown.count"] % 2 == 0).all()
    down = step_down(observed, arrays["stepdown.count"], n_rows, tail="two-sided").p_corrected * n_rows
    assert (np.rint(down) % 2 == 0).all() and down.min() >= 2
