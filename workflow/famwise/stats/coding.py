"""Covariate values (numbers or text, from the spec or participants.tsv) -> the columns of a regression design.

A covariate whose every value is a number (or text that reads as one, as in
participants.tsv) is numeric: one column. Any other covariate is categorical
(e.g. sex, site): its levels sorted as text, the first is the reference
level, and every other level gets an indicator column (1 for the subjects at
that level, 0 otherwise). Missing values (empty, ``n/a``, null) are an error
naming the subject and the covariate, and so is a rank-deficient design
(naming the covariates involved).
"""

from dataclasses import dataclass

import numpy as np

from famwise.errors import UserError
from famwise.stats.regression import collinear_columns, design_matrix

MISSING = ("", "n/a", "na", "nan")
"""Text values read as missing (BIDS writes ``n/a``), compared in lower case."""


@dataclass(frozen=True)
class CodedDesign:
    """The regression design of one contrast, in subject order.

    Attributes
    ----------
    covariate : tuple of float, length n
        The tested covariate (a two-level categorical one: the indicator of its second level).
    nuisance : tuple of tuple of float, n x q
        Each subject's nuisance columns.
    nuisance_columns : tuple of str, length q
        Column names: the covariate's name, or ``name=level`` for an indicator.
    terms : tuple of str
        One phrase per covariate, tested first, saying how it was coded.
    """

    covariate: tuple[float, ...]
    nuisance: tuple[tuple[float, ...], ...]
    nuisance_columns: tuple[str, ...]
    terms: tuple[str, ...]


def code_design(
    values: dict[str, dict[str, object]], subjects: list[str], *, tested: str, nuisance: list[str], where: str
) -> CodedDesign:
    """Code the tested and nuisance covariates of ``subjects`` into design columns.

    Parameters
    ----------
    values : dict
        Covariate name -> subject -> raw value (number, text or None).
    subjects : list of str
        The contrast's subjects, in order.
    tested : str
        The tested covariate.
    nuisance : list of str
        The nuisance covariates.
    where : str
        Where the contrast is (prefix of every message), e.g. ``"study.yaml contrasts[2]"``.

    Raises
    ------
    UserError
        A missing value (subject and covariate named), a tested covariate
        with more than two levels, a covariate with one value only, a
        rank-deficient design (the collinear covariates named), or too few
        subjects for the parameters.
    """
    columns, names, owners, terms = [], [], [], []
    for name in [tested, *nuisance]:
        coded, column_names, term = _code_one(name, values[name], subjects, where)
        if name == tested and coded.shape[1] != 1:
            raise UserError(
                f"{where}.covariate: the tested covariate '{name}' has {coded.shape[1] + 1} levels; a regression "
                "tests one coefficient: test a numeric covariate or one with two levels"
            )
        columns.append(coded)
        names += column_names
        owners += [name] * coded.shape[1]
        terms.append(term)
    matrix = np.column_stack(columns)
    design = design_matrix(matrix[:, 0], matrix[:, 1:])
    if design.shape[0] <= design.shape[1]:
        raise UserError(
            f"{where}: the regression has {design.shape[1]} parameters (intercept and {design.shape[1] - 1} "
            f"covariate columns) but {design.shape[0]} subjects; it needs more subjects than parameters"
        )
    collinear = collinear_columns(design)
    if collinear is not None:
        involved = list(dict.fromkeys("the intercept" if i == 0 else owners[i - 1] for i in collinear))
        raise UserError(
            f"{where}: the regression design is rank-deficient: {' and '.join(involved)} "
            f"{'are' if len(involved) > 1 else 'is'} collinear (a combination of "
            f"{'them' if len(involved) > 1 else 'it'} is the same for every subject or repeats another column); "
            "drop one of them or choose other covariates"
        )
    return CodedDesign(
        covariate=tuple(float(v) for v in matrix[:, 0]),
        nuisance=tuple(tuple(float(v) for v in row) for row in matrix[:, 1:]),
        nuisance_columns=tuple(names[1:]),
        terms=tuple(terms),
    )


def _code_one(name: str, given: dict[str, object], subjects: list[str], where: str):
    """(n, columns) float64, the column names and the coding phrase of one covariate."""
    raw = []
    for subject in subjects:
        value = given.get(subject)
        if value is None or (isinstance(value, str) and value.strip().lower() in MISSING):
            raise UserError(f"{where}: subject {subject} has no value of covariate '{name}' (found {value!r})")
        if isinstance(value, float) and not np.isfinite(value):
            raise UserError(f"{where}: subject {subject} has no value of covariate '{name}' (found {value!r})")
        raw.append(value.strip() if isinstance(value, str) else value)
    numbers = [as_number(v) for v in raw]
    if all(v is not None for v in numbers):
        return np.array(numbers, dtype=np.float64)[:, None], [name], f"{name} (numeric)"
    labels = [str(v) for v in raw]
    levels = sorted(set(labels))
    if len(levels) < 2:
        raise UserError(
            f"{where}: covariate '{name}' is '{levels[0]}' for every analysed subject; a covariate must vary"
        )
    coded = np.array([[float(label == level) for level in levels[1:]] for label in labels])
    phrase = f"{name} (categorical, indicator columns for {', '.join(levels[1:])}; reference level {levels[0]})"
    return coded, [f"{name}={level}" for level in levels[1:]], phrase


def as_number(value) -> float | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value)
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if np.isfinite(number) else None
