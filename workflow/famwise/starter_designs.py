"""Contrasts `famwise init` offers besides the first paired one, from what the data allow.

- four conditions: the interaction of a 2x2 within-subject design (weights
  +1 -1 -1 +1), written commented out, because only the user knows which
  conditions form the two factors;
- three or more groups of two or more subjects in participants.tsv (BIDS): the one-way between-groups
  F on the first condition.
"""

from collections import Counter


def offered_contrasts(conditions: list[str], groups: Counter) -> str:
    """YAML lines (indented as list items of ``contrasts``) of the extra contrasts; '' when none fits.

    Parameters
    ----------
    conditions : list of str
        Condition names of the starter spec, in its order.
    groups : Counter
        Subjects per value of participants.tsv's ``group`` column (empty without one).
    """
    text = ""
    if len(conditions) == 4:
        a_hi, a_lo, b_hi, b_lo = conditions
        text += f"""  # Four conditions: if they form a 2x2 design (factor levels in this order), uncomment to test the
  # interaction ({a_hi} - {a_lo}) - ({b_hi} - {b_lo}) by sign flips of each subject's weighted sum:
  # - name: interaction
  #   test: weighted
  #   conditions: [{a_hi}, {a_lo}, {b_hi}, {b_lo}]
  #   weights: [1, -1, -1, 1]
"""
    if len(groups) >= 3 and min(groups.values()) >= 2:
        names = sorted(groups)
        sizes = ", ".join(f"{g} {groups[g]}" for g in names)
        text += f"""  - name: {conditions[0]}-by-group          # participants.tsv groups: {sizes}
    test: between-groups                # one-way F over the groups, group labels permuted
    conditions: [{conditions[0]}]
    groups: [{", ".join(names)}]
"""
    return text
