"""Covariates of a study's analysed subjects, from the spec or participants.tsv, and a regression's coded design.

Functions of a `famwise.plan.Plan` (its spec, subjects and participants.tsv
rows); the plan's ``covariate`` and ``regression_design`` call them.
"""

from famwise.errors import UserError


def raw_values(plan, name: str) -> tuple[dict, str]:
    """Raw values of one covariate (subject -> number or text) and where they come from (for messages)."""
    given = (plan.study.subjects.covariates or {}).get(name)
    where = f"{plan.loaded.path.name} subjects.covariates.{name}"
    if given is None:
        if not plan.participants:
            raise UserError(
                f"{where}: covariate '{name}' has no values (give subjects.covariates or a participants.tsv column)"
            )
        where = f"participants.tsv column '{name}'"
        given = {}
        for subject, row in plan.participants.items():
            if name not in row:
                raise UserError(f"{where}: no such column (columns: {', '.join(row)})")
            given[subject] = row[name]
    return given, where


def numeric_values(plan, name: str) -> dict[str, float]:
    """Values of one covariate for the analysed subjects, each a number (UserError naming the subject otherwise)."""
    given, where = raw_values(plan, name)
    values = {}
    for subject in plan.subjects:
        raw = given.get(subject)
        try:
            values[subject] = float(raw)
        except (TypeError, ValueError):
            raise UserError(f"{where}: subject {subject} has no numeric value (found {raw!r})") from None
    return values


def regression_design(plan, name: str):
    """The coded design (`famwise.stats.coding.CodedDesign`) of regression contrast ``name``."""
    from famwise.stats.coding import code_design

    contrast = plan.contrast(name)
    index = plan.study.contrasts.index(contrast)
    names = [contrast.covariate, *(contrast.nuisance or [])]
    return code_design(
        {n: raw_values(plan, n)[0] for n in names},
        list(plan.subjects),
        tested=contrast.covariate,
        nuisance=list(contrast.nuisance or []),
        where=f"{plan.loaded.path.name} contrasts[{index}]",
    )
