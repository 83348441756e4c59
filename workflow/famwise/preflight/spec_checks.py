"""Checks of the spec against the subjects found: exclusions, group sizes, shards."""

import numpy as np

from famwise.errors import UserError
from famwise.preflight.where import Where
from famwise.spec.models import did_you_mean


def check_exclusions(plan, where: Where) -> None:
    """Every id in ``subjects.exclude`` names a subject that was found."""
    found = plan.found_subjects
    for subject in plan.study.subjects.exclude:
        if subject not in found:
            listing = ", ".join(found[:30]) + (" ..." if len(found) > 30 else "")
            raise UserError(
                f"{where('subjects', 'exclude', subject)}: no subject '{subject}' was found, so it cannot be excluded "
                f"(subjects found: {listing}){did_you_mean(subject, found)}"
            )


def check_group_sizes(plan, where: Where) -> None:
    """Each group of a two-sample or between-groups contrast holds enough analysed subjects for the test."""
    for index, contrast in enumerate(plan.study.contrasts):
        if contrast.test not in ("two-sample", "between-groups"):
            continue
        from famwise.stats.between import MIN_PER_GROUP  # imports scipy.stats (2 s): only when needed
        from famwise.stats.group import MIN_SUBJECTS

        fewest = MIN_SUBJECTS if contrast.test == "two-sample" else MIN_PER_GROUP
        for group in contrast.groups:
            members = [s for s, g in plan.groups.items() if g == group]
            if 0 < len(members) < fewest:
                noun = "subject" if len(members) == 1 else "subjects"
                raise UserError(
                    f"{where('contrasts', index, 'groups')}: group '{group}' has {len(members)} analysed {noun} "
                    f"({', '.join(members)}); the {contrast.test} test needs at least {fewest} per group"
                )


YUEN_TESTS = ("one-sample", "paired", "weighted", "two-sample")
"""Tests with a trimmed-mean (Yuen) form."""


def check_statistic(plan, where: Where) -> None:
    """``inference.statistic: yuen`` only with contrasts whose test has a trimmed-mean form."""
    if plan.study.inference.statistic != "yuen":
        return
    for contrast in plan.study.contrasts:
        if contrast.test not in YUEN_TESTS:
            raise UserError(
                f"{where('inference', 'statistic')}: 'yuen' (trimmed means) is available for the "
                f"{', '.join(YUEN_TESTS)} tests, not for contrast {contrast.name}'s '{contrast.test}'; use 't'"
            )


def permutation_table(plan, contrast):
    """The permutation table the null stage will build for one of the spec's contrasts."""
    from famwise.nulls.tables import make_table

    settings = plan.contrast_settings(contrast.name)
    return make_table(
        contrast.test,
        n_subjects=len(settings.subjects),
        permutations=plan.study.inference.permutations,
        seed=plan.study.seed,
        groups=None if settings.groups is None else np.asarray(settings.groups),
        n_conditions=len(contrast.conditions) if contrast.test == "repeated-measures" else None,
    )


def check_shards(plan, where: Where) -> None:
    """``inference.shards`` is at most the number of permutation rows of every contrast."""
    inference = plan.study.inference
    if not inference.needs_null or inference.shards == 1:
        return
    for contrast in plan.study.contrasts:
        table = permutation_table(plan, contrast)
        if inference.shards > table.n_rows:
            raise UserError(
                f"{where('inference', 'shards')}: {inference.shards} shards for the {table.n_rows} rows of contrast "
                f"{contrast.name}'s permutation table; give at most {table.n_rows} (each shard is one job)"
            )


def attainability_warnings(plan) -> list[str]:
    """One line per contrast whose permutation table cannot reach alpha (naming the smallest p)."""
    from famwise.nulls.tables import smallest_attainable_p

    inference = plan.study.inference
    if not inference.needs_null:
        return []
    warnings = []
    for contrast in plan.study.contrasts:
        table = permutation_table(plan, contrast)
        tail = "greater" if contrast.test in ("repeated-measures", "between-groups") else inference.tail
        smallest = smallest_attainable_p(table, tail=tail)
        if smallest > inference.alpha:
            kind = "all" if table.exact else "random"
            n_subjects = len(plan.contrast_settings(contrast.name).subjects)
            warnings.append(
                f"contrast {contrast.name}: the smallest attainable permutation p is {smallest:.4g} "
                f"({table.n_rows} {kind} {table.scheme} rows for {n_subjects} subjects), above alpha "
                f"{inference.alpha:g}: no permutation-based correction can declare anything; add subjects or permutations"
            )
    return warnings
