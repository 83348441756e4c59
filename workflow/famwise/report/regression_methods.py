"""The methods text of a regression contrast: its model, coding, statistic and Freedman-Lane permutations."""

from famwise.regression_words import model_formula, response_words
from famwise.report.results import ReportedContrast

REFERENCES = {
    "freedmanlane": "Freedman D, Lane D (1983). A nonstochastic interpretation of reported significance "
    "levels. J Bus Econ Stat 1(4):292-298.",
    "winkler": "Winkler AM, Ridgway GR, Webster MA, Smith SM, Nichols TE (2014). Permutation inference "
    "for the general linear model. NeuroImage 92:381-397.",
}
"""Full references of the regression's permutation scheme, by key."""


def regression_sentence(contrast: ReportedContrast, spec: dict, study: dict) -> str:
    """E.g. "Contrast age-effect (regression: high power ~ age + sex) was tested at each point by ...".

    Parameters
    ----------
    contrast : ReportedContrast
        Its ``design_terms`` say how each covariate was coded.
    spec, study : dict
        The contrast's and the study's spec (JSON).
    """
    measure = str((study.get("decomposition") or {}).get("measure", "power"))
    if (study.get("subjects") or {}).get("source") == "maps":
        measure = "map values"
    conditions = [str(c) for c in spec.get("conditions") or []]
    tested = str(spec.get("covariate", "the covariate"))
    nuisance = [str(n) for n in spec.get("nuisance") or []]
    formula = (
        model_formula(response_words(conditions, measure, spec.get("weights")), tested, nuisance)
        if conditions
        else tested
    )
    coding = "; ".join(contrast.design_terms)
    df = float(contrast.df) if contrast.df.size == 1 else float("nan")
    nuisance_words = (
        f" and {', '.join(nuisance)} as nuisance covariate{'s' if len(nuisance) > 1 else ''}" if nuisance else ""
    )
    return (
        f"Contrast {contrast.name} (regression: {formula}) was tested at each point by ordinary least squares: "
        f"the t statistic of the {tested} coefficient in a model with an intercept{nuisance_words} "
        f"({coding}), {contrast.tail}, across n = {contrast.n} participants, df = n − p = {df:g}."
    )


def regression_resampling(contrast: ReportedContrast, study: dict) -> str:
    """The permutation scheme (Freedman & Lane 1983; Winkler et al. 2014) with its size and smallest p."""
    info = contrast.nulls
    if not info:
        return ""
    scheme = (
        " Its permutation null followed Freedman & Lane (1983; Winkler et al. 2014): the residuals of the "
        "reduced model (intercept and nuisance covariates) were permuted among participants, added back to "
        "the reduced model's fit, and the full model refitted"
    )
    if info.get("exact"):
        size = f"; all {info.get('n_rows')} orders were enumerated (p = share of orders at least as extreme, the observed one included)"
    else:
        size = (
            f"; {info.get('permutations')} random orders were drawn with seed {study.get('seed')} "
            f"({info.get('n_rows')} rows, the observed order included; p = (1 + b)/(1 + m), Phipson & Smyth 2010)"
        )
    return scheme + size + f"; the smallest attainable p was {info.get('smallest_p'):.4g}."
