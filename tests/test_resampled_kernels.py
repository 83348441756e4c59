"""The numba kernels of the permutation engine, run as their Python source (bounds-checked indexing)."""

import numpy as np

import famwise.nulls.engine as engine
from famwise.kernels.resampled_stats import _signflip_yuen
from famwise.naive.stats import null_stats
from famwise.nulls.engine import iter_null_blocks
from famwise.nulls.tables import make_table


def test_signflip_yuen_kernel_stays_inside_its_buffer(monkeypatch):
    """Rows that flip the subject of largest |value| negative (half of all rows) used to append one value
    past the kernel's n-slot buffer. Its Python source checks every index, as NUMBA_BOUNDSCHECK=1 does for
    the compiled kernel; both must give the same bits, and the trimmed t of each flipped data set sorted
    anew (Tukey & McLaughlin 1963, via famwise.naive.stats.null_stats)."""
    rng = np.random.default_rng(3)
    x = rng.standard_normal((7, 40)) + 0.2
    table = make_table("one-sample", n_subjects=7, permutations=1000, seed=0)
    assert table.exact and table.n_rows == 128
    largest = np.argmax(np.abs(x), axis=0)
    assert (table.rows[:, largest] < 0).any(axis=1).sum() > 64  # rows flipping some point's largest value
    compiled = np.concatenate(list(iter_null_blocks(x, table.rows, test="one-sample", statistic="yuen")))
    monkeypatch.setattr(engine, "_signflip_yuen", getattr(_signflip_yuen, "py_func", _signflip_yuen))
    python = np.concatenate(list(iter_null_blocks(x, table.rows, test="one-sample", statistic="yuen")))
    assert python.tobytes() == compiled.tobytes()
    expected = null_stats(x, table.rows, test="one-sample", statistic="yuen")
    np.testing.assert_allclose(compiled, expected, rtol=2e-6)
