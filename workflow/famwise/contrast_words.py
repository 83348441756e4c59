"""A contrast's design in words: the weighted sum each subject contributes and the question asked.

Used by ``famwise check``, the methods paragraph and the values tables, so
that every place names a design the same way.
"""

from famwise.spec.contrast_design import contrast_weights


def weighted_formula(conditions, weights) -> str:
    """The weighted sum of conditions in words.

    ``"A"`` for one condition of weight 1, ``"A minus B"`` for +1 -1,
    ``"(A_hi - A_lo) - (B_hi - B_lo)"`` for the 2x2 interaction +1 -1 -1 +1,
    otherwise the terms, e.g. ``"2 x A - B - C"``.
    """
    conditions = [str(c) for c in conditions]
    weights = [float(w) for w in weights]
    if weights == [1.0]:
        return conditions[0]
    if weights == [1.0, -1.0]:
        return f"{conditions[0]} minus {conditions[1]}"
    if weights == [1.0, -1.0, -1.0, 1.0]:
        a_hi, a_lo, b_hi, b_lo = conditions
        return f"({a_hi} - {a_lo}) - ({b_hi} - {b_lo})"
    text = ""
    for condition, w in zip(conditions, weights):
        if w == 0:
            continue
        size = abs(w)
        term = condition if size == 1 else f"{size:g} x {condition}"
        text += (term if w > 0 else f"-{term}") if not text else (f" + {term}" if w > 0 else f" - {term}")
    return text


def design_words(test: str, conditions, *, groups=None, weights=None, covariate=None) -> str:
    """What a contrast tests, e.g. ``"interaction: (A_hi - A_lo) - (B_hi - B_lo)"``."""
    conditions = list(conditions)
    if test == "repeated-measures":
        return f"conditions {', '.join(conditions)} differ (F)"
    value = weighted_formula(conditions, contrast_weights(test, len(conditions), weights))
    groups = list(groups or [])
    interaction = len(conditions) > 1
    if test == "two-sample":
        kind = "group x condition interaction" if interaction else "group difference"
        return f"{kind}: {groups[0]} minus {groups[1]} on {value}"
    if test == "between-groups":
        kind = "group x condition interaction" if interaction else "group differences"
        return f"{kind} (F over groups {', '.join(groups)}) on {value}"
    if test == "correlation":
        return f"correlation of {value} with {covariate}"
    if test == "weighted" and weights is not None and [float(w) for w in weights] == [1.0, -1.0, -1.0, 1.0]:
        return f"interaction: {value}"
    return f"{value} against zero"


def design_direction(spec: dict, positive: bool) -> str:
    """Plain words for the sign of an effect of a weighted, interaction or between-groups contrast (spec entry)."""
    conditions = [str(c) for c in spec.get("conditions") or []]
    groups = [str(g) for g in spec.get("groups") or []]
    test = spec.get("test", "")
    if test == "between-groups":
        return f"differences among groups {', '.join(groups)}"
    value = weighted_formula(conditions, contrast_weights(test, len(conditions), spec.get("weights")))
    if test == "two-sample":
        return f"{groups[0]} {'>' if positive else '<'} {groups[1]} on {value}"
    return f"{value} {'above' if positive else 'below'} zero"


_RESAMPLINGS = {"sign-flip": "sign flips", "label": "group relabellings", "within-subject": "within-subject orders"}


def resampling_words(scheme: str, n_subjects: int, *, group_sizes=None, n_conditions=None) -> str:
    """How many distinct resamplings a design has, as a formula: e.g. ``"2^18 sign flips"``.

    ``group_sizes`` for the label scheme (n! / (n_0! n_1! ...)), ``n_conditions`` k for within-subject ((k!)^n).
    """
    n = n_subjects
    if scheme == "sign-flip":
        return f"2^{n} sign flips"
    if scheme == "label":
        sizes = " ".join(f"{s}!" for s in group_sizes)
        return f"{n}! / ({sizes}) {_RESAMPLINGS[scheme]}"
    if scheme == "within-subject":
        return f"({n_conditions}!)^{n} {_RESAMPLINGS[scheme]}"
    return f"{n}! covariate orders"


def contrast_line(contrast, *, n_subjects: int, table=None, group_sizes=None) -> str:
    """One line of ``famwise check`` for a spec contrast: its test, design in words, subjects and permutations.

    ``table`` is the contrast's `famwise.nulls.tables.PermutationTable` (None without a permutation null).
    """
    words = design_words(
        contrast.test,
        contrast.conditions,
        groups=contrast.groups,
        weights=contrast.weights,
        covariate=contrast.covariate,
    )
    text = f"{contrast.name}: {contrast.test}, {words}, {n_subjects} subjects"
    if group_sizes:
        text += " (" + ", ".join(f"{g} {s}" for g, s in zip(contrast.groups, group_sizes)) + ")"
    if table is None:
        return text
    count = resampling_words(table.scheme, n_subjects, group_sizes=group_sizes, n_conditions=len(contrast.conditions))
    if table.exact:
        return f"{text}, {count}: exact (all {table.n_rows})"
    return f"{text}, {table.n_rows - 1} random of {count} ({table.n_distinct:.3g}): Monte Carlo"


def heading_words(spec: dict) -> str:
    """The conditions of a spec contrast as the report's contrast heading shows them.

    ``A − B`` (the conditions joined) for one-sample, paired and correlation; the design
    in words for weighted, interaction, between-groups and repeated-measures contrasts;
    the model, e.g. ``"(A - B) ~ age + sex, testing age"``, for a regression.
    """
    conditions = [str(c) for c in spec.get("conditions") or []]
    test = spec.get("test", "")
    if test in ("weighted", "between-groups", "repeated-measures") or (test == "two-sample" and len(conditions) > 1):
        return design_words(test, conditions, groups=spec.get("groups"), weights=spec.get("weights"))
    if test == "regression":
        value = weighted_formula(conditions, contrast_weights(test, len(conditions), spec.get("weights")))
        value = value if value == conditions[0] else f"({value.replace(' minus ', ' - ')})"
        terms = " + ".join([str(spec["covariate"]), *map(str, spec.get("nuisance") or [])])
        return f"{value} ~ {terms}, testing {spec['covariate']}"
    return " − ".join(conditions)
