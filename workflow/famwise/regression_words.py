"""A regression contrast in words: its model, its degrees of freedom and its Freedman-Lane permutations."""

import math

from famwise.contrast_words import weighted_formula
from famwise.spec.contrast_design import contrast_weights


def model_formula(response: str, tested: str, nuisance: list[str]) -> str:
    """E.g. ``"high power ~ age + sex + site"`` (tested covariate first)."""
    return f"{response} ~ {' + '.join([tested, *nuisance])}"


def response_words(conditions: list[str], measure: str, weights=None) -> str:
    """The modelled map: ``"high power"``, ``"(high - low) power"`` or the weighted sum, e.g. ``"(a - b - c + d) power"``."""
    weights = contrast_weights("regression", len(conditions), weights)
    if len(conditions) == 1 and weights == (1.0,):
        return f"{conditions[0]} {measure}"
    return f"({weighted_formula(conditions, weights).replace(' minus ', ' - ')}) {measure}"


def permutation_words(n_subjects: int, permutations: int) -> str:
    """E.g. ``"1,000 Freedman-Lane permutations"``, or every order when all n! fit."""
    if math.factorial(n_subjects) <= permutations + 1:
        return f"all {math.factorial(n_subjects):,} ({n_subjects}!) Freedman-Lane permutations: enumerated"
    return f"{permutations:,} Freedman-Lane permutations"


def check_line(plan, contrast) -> str:
    """The line ``famwise check`` prints for a regression contrast.

    E.g. ``"regression: high power ~ age + sex + site, testing age, 30 subjects,
    df 26, 1,000 Freedman-Lane permutations; sex: reference level F"``.
    """
    coded = plan.regression_design(contrast.name)
    study = plan.study
    measure = study.decomposition.measure if study.subjects.source != "maps" else "maps"
    n = len(plan.subjects)
    df = n - 2 - len(coded.nuisance_columns)
    line = (
        f"regression: {model_formula(response_words(contrast.conditions, measure, contrast.weights), contrast.covariate, contrast.nuisance or [])}"
        f", testing {contrast.covariate}, {n} subjects, df {df}"
    )
    if study.inference.needs_null:
        line += f", {permutation_words(n, study.inference.permutations)}"
    return line + "; coding: " + "; ".join(coded.terms)
