"""Label permutations of three or more groups: counting and enumerating the distinct assignments.

A label assignment gives each subject one of the k group labels with the
group sizes held fixed; there are n! / (n_0! n_1! ... n_{k-1}!) of them (the
multinomial coefficient). Rows follow the label scheme of
`famwise.nulls.tables`: subject i takes the label of subject ``row[i]``.
"""

import itertools
import math
from collections import Counter

import numpy as np


def n_assignments(groups: np.ndarray) -> int:
    """The multinomial coefficient n! / prod_g n_g!: distinct label assignments with the group sizes kept."""
    count = math.factorial(groups.size)
    for size in np.bincount(groups):
        count //= math.factorial(int(size))
    return count


def n_relabellings(groups: np.ndarray) -> int:
    """Assignments that only swap whole groups of equal size: prod over sizes s of (groups of size s)!.

    They give the identity's F for any data (F does not depend on which label a group carries).
    """
    count = 1
    for multiplicity in Counter(np.bincount(groups).tolist()).values():
        count *= math.factorial(multiplicity)
    return count


def enumerate_assignments(groups: np.ndarray) -> np.ndarray:
    """Every distinct assignment once, the identity first, as rows int32 (n_assignments, n).

    Assignments are listed by choosing group 0's members (in
    ``itertools.combinations`` order), then group 1's from the rest, and so on.
    """
    n = groups.size
    k = int(groups.max()) + 1
    members = [np.flatnonzero(groups == g) for g in range(k)]
    sizes = [m.size for m in members]
    observed = tuple(tuple(m.tolist()) for m in members)
    splits = [observed] + [s for s in _splits(tuple(range(n)), sizes) if s != observed]
    rows = np.empty((len(splits), n), dtype=np.int32)
    for r, split in enumerate(splits):
        for g, chosen in enumerate(split):
            rows[r, list(chosen)] = members[g]
    return rows


def _splits(free: tuple, sizes: list[int]):
    """Ordered partitions of ``free`` into blocks of the given sizes (tuples of subject indices)."""
    if len(sizes) == 1:
        yield (free,)
        return
    for chosen in itertools.combinations(free, sizes[0]):
        taken = set(chosen)
        rest = tuple(i for i in free if i not in taken)
        for tail in _splits(rest, sizes[1:]):
            yield (chosen, *tail)
