"""The null stage: permutation tables, the block engine, the collectors and the shard runner.

- `tables`: the permutation table of a contrast (identity first), its shards
  and the smallest attainable p;
- `engine`: statistic maps of blocks of table rows (the fast paths per
  scheme; numba kernels in `famwise.kernels`) fed to the collectors;
- `collectors`: what each correction keeps of the null (see its package);
- `screen`: left-out points and non-finite permutation values, set aside
  before the collectors see a block;
- `shard`: one shard of a study's table through every correction's
  collector (the null jobs' entry points).

The stage reads only earlier stages (the contrast data, the observed
statistic) and the leaf modules `famwise.stats` and `famwise.kernels`; the
correction stage (`famwise.correct`) reads what it writes.

Tie convention
--------------
A permutation whose statistic equals the observed one counts as reaching it:
every count is #{rows : value >= observed value} on the tail's scale
(|stat| two-sided, stat greater, -stat less), the identity row (row 0)
included, so a tie makes a p larger, never smaller, and p = count / n_rows.
Equality is judged on the engine's float32 values, and the observed
statistic stored by the observed stage is the engine's own identity row, so
the identity always ties with itself. Where a count compares with a value
not computed by the engine in the same way, values a little below the
observed one count as equal too: 100 float32 epsilons (relative) for the
per-point exceedance counts, 1e-9 (relative) for the cluster and TFCE
maxima; the max-statistic and step-down counts compare bits and need no
tolerance.

Mirror images tie exactly. Flipping every sign (sign-flip scheme), and
swapping the two groups of an equal-size two-sample split (label scheme),
negate t, Welch t and Yuen's t in exact arithmetic, and the engine keeps
that in floating point: t comes from exact sums on an integer grid, and the
label scheme's Yuen t swaps the two groups' trimmed statistics, so the
mirror row's map is the identity's negated bit for bit. The sign-flip Yuen
kernel sums the mirror row's sorted values in the reverse order, so its
float64 values may differ in the last bits; the stored float32 values agree
unless a value lies within a few float64 units of a float32 rounding
boundary (on the order of one point in 10^8), and the exceedance counts'
tolerance covers that case. Under a two-sided tail an exact enumeration
therefore counts each mirror pair together, and
`famwise.nulls.tables.smallest_attainable_p` is 2 / n_rows.

Left-out and degenerate points
------------------------------
Points the observed stage left out of the family (``left_out`` in
``observed.npz``, see `famwise.degenerate`) are blanked: the engine runs on
data that are 0 there, and their statistic is 0 in every row, so they never
join or link a cluster or raise a TFCE value; the max-statistic and
step-down collectors leave them out entirely. A permutation row in which an
included point's statistic is not finite (a point that becomes degenerate
only after permutation, e.g. every |value| equal and all signs flipped
alike) counts as more extreme than any observed value: the point counts as
an exceedance, and the row's maximum is +inf for max-statistic, step-down,
cluster and TFCE (the cluster and TFCE kernels never see the infinity: they
run on the row with it set to 0, and the row's maximum is then set to +inf).
Calibration uses the same collectors and the same screening.
"""
