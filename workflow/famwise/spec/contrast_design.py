"""Checks of a contrast's design: condition weights, interactions and the number of groups.

Called by ``famwise.spec.models.Contrast``; every problem is a ``LocatedError``
on the contrast's own key, and names the contrast.

Rules:

- ``weights`` (one per listed condition) are used by ``weighted`` (sign flips
  on each subject's weighted sum), ``two-sample`` and ``between-groups``
  (the groups are compared on each subject's weighted sum) and
  ``regression`` (the model is fitted to each subject's weighted sum).
- Weights over two or more conditions must sum to zero (a contrast among
  conditions); a single weighted condition is tested against zero.
- ``two-sample`` with two conditions and no weights tests each subject's
  first minus second condition (the group x condition interaction).
- ``between-groups`` compares three or more groups (one-way F).
"""

import math

from famwise.spec.base import LocatedError

WEIGHTED_TESTS = ("weighted", "two-sample", "between-groups", "regression")
"""Tests that accept ``weights``."""

ZERO_SUM = 1e-9
"""Largest |sum of weights| counted as zero, relative to the largest |weight|."""


def check_contrast_design(contrast) -> None:
    """Raise LocatedError when weights, conditions or groups do not fit the contrast's test."""
    name, test, weights = contrast.name, contrast.test, contrast.weights
    n = len(contrast.conditions)
    if weights is None:
        if test == "weighted":
            raise LocatedError(("weights",), f"contrast '{name}': test 'weighted' needs one weight per condition")
        if test in ("two-sample", "between-groups", "regression") and n > 2:
            raise LocatedError(
                ("weights",),
                f"contrast '{name}': test '{test}' with {n} conditions needs weights (one per condition, summing to zero)",
            )
    else:
        _check_weights(name, test, weights, n)
    if test == "between-groups" and (not contrast.groups or len(contrast.groups) < 3):
        raise LocatedError(
            ("groups",),
            f"contrast '{name}': test 'between-groups' needs three or more groups: [first, second, third, ...]",
        )
    if test == "between-groups" and len(set(contrast.groups)) != len(contrast.groups):
        raise LocatedError(("groups",), f"contrast '{name}': a group is listed twice")


def _check_weights(name: str, test: str, weights: list[float], n: int) -> None:
    if test not in WEIGHTED_TESTS:
        raise LocatedError(
            ("weights",),
            f"contrast '{name}': weights are used by 'weighted', 'two-sample', 'between-groups' and 'regression', "
            f"not '{test}'",
        )
    if len(weights) != n:
        raise LocatedError(
            ("weights",), f"contrast '{name}': {len(weights)} weights for {n} conditions; give one weight per condition"
        )
    if not all(math.isfinite(w) for w in weights) or not any(weights):
        raise LocatedError(("weights",), f"contrast '{name}': weights must be finite numbers, not all zero")
    total = math.fsum(weights)
    if n > 1 and abs(total) > ZERO_SUM * max(abs(w) for w in weights):
        raise LocatedError(
            ("weights",),
            f"contrast '{name}': weights over {n} conditions must sum to zero (they sum to {total:g}); "
            "only a single condition can be tested against zero",
        )


def contrast_weights(test: str, n_conditions: int, weights) -> tuple[float, ...] | None:
    """The weight of each condition in the value a subject contributes, or None (repeated measures: no sum).

    ``paired`` and a two-condition ``two-sample`` or ``between-groups`` without
    weights are first minus second; a single condition has weight 1.
    """
    if test == "repeated-measures":
        return None
    if weights is not None:
        return tuple(float(w) for w in weights)
    if n_conditions == 2:
        return (1.0, -1.0)
    return (1.0,)
