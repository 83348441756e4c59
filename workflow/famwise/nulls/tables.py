"""Permutation tables, their shards and the smallest attainable permutation p.

One permutation table per contrast is generated from the seed; row 0 is
always the identity (the observed data). Shard k of K runs rows
[k m, (k + 1) m) with m = ceil(n_rows / K). Each row's statistic is computed
the same way whatever the shard, block or thread (see
`famwise.nulls.engine`), so merged nulls are bit-identical for any number
of shards or cores.

Schemes: sign flips (one-sample, paired, weighted: under H0 each subject's
map is symmetric about 0), label permutations (two-sample, between-groups:
the group sizes are kept, `famwise.nulls.multigroup`), condition permutations
within subject (repeated measures), covariate permutations (correlation),
permutations of the reduced model's residuals (regression, Freedman & Lane
1983; `famwise.nulls.freedman_lane`).

p-values: the identity row is counted in every exceedance count, so
``count / n_rows`` is #{null >= observed} / n_total for an exact
(enumerated) table and (1 + b) / (1 + m) for a Monte Carlo table of m
random rows, b of which reach the observed value (Phipson & Smyth 2010).

References
----------
Phipson B, Smyth GK (2010). Permutation p-values should never be zero.
Stat Appl Genet Mol Biol 9(1): Article 39.
Nichols TE, Holmes AP (2002). Nonparametric permutation tests for functional
neuroimaging. Hum Brain Mapp 15:1-25.
"""

import itertools
import math
import warnings
from dataclasses import dataclass

import numpy as np

from famwise.errors import FamwiseWarning, UserError
from famwise.nulls.multigroup import enumerate_assignments, n_assignments, n_relabellings
from famwise.stats import TAILS, TESTS, check_design

SCHEMES = {
    "one-sample": "sign-flip",
    "paired": "sign-flip",
    "weighted": "sign-flip",
    "two-sample": "label",
    "between-groups": "label",
    "repeated-measures": "within-subject",
    "correlation": "covariate",
    "regression": "freedman-lane",
}


@dataclass(frozen=True)
class PermutationTable:
    """All resamplings of one run, identity first.

    Attributes
    ----------
    scheme : {"sign-flip", "label", "within-subject", "covariate", "freedman-lane"}
    rows : ndarray
        sign-flip: int8 (n_rows, n) of +1/-1; label, covariate, freedman-lane:
        int32 (n_rows, n) permutations of subject indices (subject i takes the
        label, covariate or reduced-model residual of subject ``row[i]``); within-subject: int32
        (n_rows, n, k) (subject i's condition j takes the data of its
        condition ``row[i, j]``). Row 0 is the identity.
    exact : bool
        True when the rows enumerate every distinct resampling once.
    n_rows : int
        Number of rows (identity included).
    n_distinct : int
        Number of distinct resamplings of the design.
    n_identical : int
        Rows of an exact table that give the identity's statistic for any
        data (within-subject: the k! relabellings of all subjects at once
        leave F unchanged; between groups: the swaps of whole groups of equal
        size, `famwise.nulls.multigroup.n_relabellings`; otherwise 1).
    n_mirrored : int
        Rows of an exact table that give minus the identity's statistic for
        any data (sign flips: flipping every subject; labels with equal group
        sizes: swapping the groups; otherwise 0).
    seed : int
        The seed the table was drawn from.
    """

    scheme: str
    rows: np.ndarray
    exact: bool
    n_rows: int
    n_distinct: int
    n_identical: int
    n_mirrored: int
    seed: int


def make_table(test, *, n_subjects, permutations, seed, groups=None, n_conditions=None) -> PermutationTable:
    """Build the permutation table of one test.

    Exact enumeration when every distinct resampling fits:
    n_distinct <= permutations + 1 (2^n sign flips, C(n, n0) relabellings,
    n! / (n_0! ... n_{k-1}!) for k groups,
    (k!)^n within-subject permutations, n! covariate orders), identity first.
    Otherwise Monte Carlo: the identity and then permutations rows drawn
    independently (with replacement, so a row may repeat or equal the
    identity, as the (1 + b) / (1 + m) p-value assumes) from
    ``numpy.random.default_rng(seed)``. The same seed gives the same table,
    bit for bit.

    Parameters
    ----------
    test : str
        One of `famwise.stats.TESTS`.
    n_subjects : int
    permutations : int
        Requested number of random resamplings (besides the identity).
    seed : int
    groups : array_like of int, shape (n_subjects,), optional
        0/1 labels (two-sample), 0 .. k - 1 (between-groups).
    n_conditions : int, optional
        k (repeated measures only).

    Returns
    -------
    PermutationTable
    """
    n, k = _check_table_inputs(test, n_subjects, permutations, seed, groups, n_conditions)
    scheme = SCHEMES[test]
    groups = None if groups is None else np.asarray(groups, dtype=np.int64)
    n_distinct = _n_distinct(scheme, n, k, groups)
    exact = n_distinct <= permutations + 1
    if exact:
        rows = _enumerate(scheme, n, k, groups)
    else:
        rows = _draw(scheme, n, k, permutations, np.random.default_rng(seed))
    n_identical = math.factorial(k) if scheme == "within-subject" else 1
    if test == "between-groups":
        n_identical = n_relabellings(groups)
    if scheme == "sign-flip":
        n_mirrored = 1
    elif scheme == "label" and test == "two-sample":
        n_mirrored = int(2 * np.count_nonzero(groups == 0) == n)
    else:
        n_mirrored = 0
    return PermutationTable(
        scheme=scheme,
        rows=rows,
        exact=exact,
        n_rows=rows.shape[0],
        n_distinct=n_distinct,
        n_identical=n_identical,
        n_mirrored=n_mirrored,
        seed=seed,
    )


def shard_bounds(n_rows: int, n_shards: int, k: int) -> tuple[int, int]:
    """Row range [start, stop) of shard k: m = ceil(n_rows / n_shards) rows each, the last shorter."""
    if n_shards < 1:
        raise UserError(f"the number of shards must be at least 1, got {n_shards}")
    if not 0 <= k < n_shards:
        raise UserError(f"shard index must be between 0 and {n_shards - 1}, got {k}")
    m = -(-n_rows // n_shards)
    return min(k * m, n_rows), min((k + 1) * m, n_rows)


def smallest_attainable_p(table: PermutationTable, *, tail: str) -> float:
    """Smallest permutation p the table can give.

    Monte Carlo: 1 / (m + 1). Exact: (rows tying with the identity) / n_rows,
    e.g. 2 / 2^n for two-sided sign flips (flipping every sign gives -t),
    1 / 2^n one-sided; k! / (k!)^n for F.
    """
    check_tail(tail)
    if not table.exact:
        return 1.0 / table.n_rows
    ties = table.n_identical + (table.n_mirrored if tail == "two-sided" and table.scheme != "within-subject" else 0)
    return ties / table.n_rows


def check_attainable(table: PermutationTable, *, tail: str, alpha: float) -> None:
    """Warn (FamwiseWarning) when no permutation p can reach alpha, naming the smallest p."""
    p_min = smallest_attainable_p(table, tail=tail)
    if p_min > alpha:
        kind = "exact" if table.exact else "Monte Carlo"
        warnings.warn(
            f"the smallest attainable {tail} permutation p is {p_min:.6g} ({kind}, {table.n_rows} "
            f"{table.scheme} rows), above alpha {alpha}: no point can be significant; "
            "add subjects or permutations",
            FamwiseWarning,
            stacklevel=2,
        )


def check_tail(tail) -> None:
    """Raise UserError unless ``tail`` is one of `famwise.stats.TAILS`."""
    if tail not in TAILS:
        raise UserError(f"`tail` must be one of {', '.join(map(repr, TAILS))}, got {tail!r}")


def _check_table_inputs(test, n, permutations, seed, groups, n_conditions):
    if test not in TESTS:
        raise UserError(f"`test` must be one of {', '.join(map(repr, TESTS))}, got {test!r}")
    if int(permutations) != permutations or permutations < 1:
        raise UserError(f"`permutations` must be a whole number of at least 1, got {permutations}")
    if int(seed) != seed or seed < 0:
        raise UserError(f"`seed` must be a whole number of at least 0, got {seed}")
    if n < 3:
        raise UserError(f"the {test} test needs at least 3 subjects, got {n}")
    k = None
    if test in ("two-sample", "between-groups"):
        check_design(np.zeros((n, 1)), test=test, groups=groups)
    if test == "repeated-measures":
        if n_conditions is None or n_conditions < 3:
            raise UserError(
                f"the repeated-measures test needs at least 3 conditions, got {n_conditions} "
                "(use the paired test for two)"
            )
        k = int(n_conditions)
    return int(n), k


def _n_distinct(scheme, n, k, groups) -> int:
    if scheme == "sign-flip":
        return 2**n
    if scheme == "label":
        return n_assignments(groups)
    if scheme == "within-subject":
        return math.factorial(k) ** n
    return math.factorial(n)


def _enumerate(scheme, n, k, groups) -> np.ndarray:
    if scheme == "sign-flip":
        bits = (np.arange(2**n, dtype=np.int64)[:, None] >> np.arange(n)) & 1
        return (1 - 2 * bits).astype(np.int8)
    if scheme in ("covariate", "freedman-lane"):
        return np.array(list(itertools.permutations(range(n))), dtype=np.int32)
    if scheme == "label" and groups.max() > 1:
        return enumerate_assignments(groups)
    if scheme == "within-subject":
        perms = np.array(list(itertools.permutations(range(k))), dtype=np.int32)
        n_perms = perms.shape[0]
        index = np.arange(n_perms**n, dtype=np.int64)
        digits = (index[:, None] // n_perms ** np.arange(n)) % n_perms
        return perms[digits]
    members0 = np.flatnonzero(groups == 0)
    members1 = np.flatnonzero(groups == 1)
    observed = tuple(members0.tolist())
    combos = [observed] + [c for c in itertools.combinations(range(n), members0.size) if c != observed]
    rows = np.empty((len(combos), n), dtype=np.int32)
    for r, chosen in enumerate(combos):
        in0 = np.zeros(n, dtype=bool)
        in0[list(chosen)] = True
        rows[r, in0] = members0
        rows[r, ~in0] = members1
    return rows


def _draw(scheme, n, k, m, rng) -> np.ndarray:
    if scheme == "sign-flip":
        flips = rng.integers(0, 2, size=(m, n), dtype=np.int8)
        return np.concatenate([np.ones((1, n), dtype=np.int8), (1 - 2 * flips).astype(np.int8)])
    if scheme == "within-subject":
        base = np.broadcast_to(np.arange(k, dtype=np.int32), (m + 1, n, k)).copy()
        base[1:] = rng.permuted(base[1:], axis=2)
        return base
    base = np.broadcast_to(np.arange(n, dtype=np.int32), (m + 1, n)).copy()
    base[1:] = rng.permuted(base[1:], axis=1)
    return base
