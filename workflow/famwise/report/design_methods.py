"""Methods sentences of the weighted, interaction and between-groups designs, with their references."""

from famwise.contrast_words import design_words, weighted_formula
from famwise.spec.contrast_design import contrast_weights

DESIGN_REFERENCES = {
    "anova": "Fisher RA (1925). Statistical Methods for Research Workers. Oliver and Boyd, Edinburgh.",
    "permutation": "Nichols TE, Holmes AP (2002). Nonparametric permutation tests for functional neuroimaging: "
    "a primer with examples. Hum Brain Mapp 15(1):1-25.",
}
"""Full references of the designs, by key (merged into the methods paragraph's references)."""


def is_design(spec: dict) -> bool:
    """Whether a spec contrast is one of the designs this module words (weighted, interaction, F designs)."""
    test = spec.get("test")
    return test in ("weighted", "between-groups", "repeated-measures") or (
        test == "two-sample" and len(spec.get("conditions") or []) > 1
    )


def design_sentence(name: str, spec: dict, *, n: int, tail: str, test_words: str) -> str:
    """The design sentence of one contrast: value per subject, statistic, resampling scheme, references.

    ``test_words`` names the t statistic used (t test or Yuen's trimmed t); F designs ignore it.
    """
    test = spec["test"]
    conditions = [str(c) for c in spec.get("conditions") or []]
    if test == "repeated-measures":
        return repeated_measures_sentence(name, conditions, n=n)
    weights = contrast_weights(test, len(conditions), spec.get("weights"))
    value = weighted_formula(conditions, weights)
    listed = ", ".join(f"{w:g} x {c}" for c, w in zip(conditions, weights))
    what = design_words(test, conditions, groups=spec.get("groups"), weights=spec.get("weights"))
    per_subject = (
        f"each participant's map was the weighted sum of its condition maps ({listed}), i.e. {value}"
        if len(conditions) > 1 or weights != (1.0,)
        else f"each participant's map was its {value} map"
    )
    if test == "weighted":
        return (
            f"Contrast {name} ({what}): {per_subject}; these maps were tested against zero at each point with a "
            f"one-sample {test_words}, {tail}, across n = {n} participants, and the permutation null flipped the "
            "sign of each participant's map (under the null hypothesis each map is symmetric about zero; "
            "Nichols & Holmes 2002)."
        )
    groups = [str(g) for g in spec.get("groups") or []]
    if test == "two-sample":
        return (
            f"Contrast {name} ({what}): {per_subject}; group {groups[0]} was compared with group {groups[1]} "
            f"on these maps at each point with a two-sample {test_words}, {tail}, across n = {n} participants, "
            "and the permutation null reassigned the group labels among the participants with the group sizes "
            "kept (Nichols & Holmes 2002)."
        )
    return (
        f"Contrast {name} ({what}): {per_subject}; the {len(groups)} groups ({', '.join(groups)}) were compared "
        f"on these maps at each point with a one-way between-subject F test (df {len(groups) - 1} and "
        f"{n - len(groups)}; Fisher 1925), upper tail, across n = {n} participants, and the permutation null "
        "reassigned the group labels among the participants with the group sizes kept (all n! / (n_1! ... n_k!) "
        "distinct assignments when they fit; Nichols & Holmes 2002)."
    )


def repeated_measures_sentence(name: str, conditions: list[str], *, n: int) -> str:
    """The design sentence of a one-way repeated-measures F over ``conditions`` (k >= 3) in ``n`` participants."""
    k = len(conditions)
    return (
        f"Contrast {name} ({design_words('repeated-measures', conditions)}): each participant's maps of the {k} "
        f"conditions ({', '.join(conditions)}) were compared at each point with a one-way repeated-measures F test "
        f"(df {k - 1} and {(n - 1) * (k - 1)}; Fisher 1925), upper tail, across n = {n} participants, and the "
        "permutation null permuted the condition labels within each participant (under the null hypothesis "
        "each participant's condition maps are exchangeable; Nichols & Holmes 2002)."
    )


def design_reference_keys(specs) -> list[str]:
    """Keys of `DESIGN_REFERENCES` the spec's contrasts use, in a stable order."""
    designs = [s for s in specs if is_design(s)]
    keys = []
    if any(s.get("test") in ("between-groups", "repeated-measures") for s in designs):
        keys.append("anova")
    if designs:
        keys.append("permutation")
    return keys
