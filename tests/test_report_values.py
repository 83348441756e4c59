"""Strips of the per-subject value plots (famwise.report.values.categories)."""

from famwise.report.values import categories


def _rows(columns, groups=None):
    rows = []
    for s in range(4):
        row = {"id": "1", "subject": f"0{s}", **{c: str(s + k) for k, c in enumerate(columns)}}
        if groups:
            row["group"] = groups[s % 2]
        rows.append(row)
    return rows


def test_paired_strips_are_both_conditions_and_the_contrast_joined_by_lines():
    strips = categories(["a", "b", "contrast"], _rows(["a", "b", "contrast"]))
    assert [s["label"] for s in strips] == ["a", "b", "contrast"]
    assert all(s["paired"] for s in strips)
    assert strips[1]["values"] == [1.0, 2.0, 3.0, 4.0]


def test_a_contrast_that_repeats_the_only_condition_is_one_strip():
    strips = categories(["a", "contrast"], _rows(["a", "contrast"]))
    assert [s["label"] for s in strips] == ["a"] and not strips[0]["paired"]


def test_two_sample_strips_split_by_group():
    strips = categories(["a", "contrast"], _rows(["a", "contrast"], groups=["old", "young"]))
    assert [s["label"] for s in strips] == ["a (old)", "a (young)"]
    assert strips[0]["subjects"] == ["00", "02"] and strips[1]["values"] == [1.0, 3.0]


def test_caption_names_the_strips_of_each_design():
    from famwise.report.values import _column_words

    assert _column_words(["a", "b", "contrast"], _rows(["a", "b", "contrast"])) == (
        "columns are the conditions and the tested contrast"
    )
    assert _column_words(["a", "b", "c"], _rows(["a", "b", "c"])) == "columns are the conditions"  # repeated measures
    grouped = _rows(["a", "contrast"], groups=["old", "young"])
    assert _column_words(["a", "contrast"], grouped) == "columns are the condition, per group"
