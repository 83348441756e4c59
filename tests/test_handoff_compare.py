"""famwise compare on hand-made provenance records: each cause named, the plain failure case, exit codes."""

import copy
import json

import pytest

from famwise.cli import main
from famwise.handoff.compare import compare_records, comparison_text
from famwise.report.result_hashes import results_fingerprint


def _base() -> dict:
    corrections = {
        "holm": {
            "n_significant": 4,
            "arrays": {"mask": "m1", "p_corrected": "p1", "n_significant": "n1"},
            "tables": {},
        },
        "clusters": {
            "n_significant": 9,
            "arrays": {"mask": "m2", "p_corrected": "p2", "null": "z2"},
            "tables": {"clusters.tsv": "t2"},
        },
    }
    return {
        "spec_fingerprint": "f" * 64,
        "spec_settings": {
            "name": "demo",
            "output": "results",
            "seed": 7,
            "inference.permutations": 99,
            "inference.shards": 2,
            "inference.alpha": 0.05,
            "inference.family": "per-contrast",
            "decomposition.cycles": 3,
            "contrasts[a].test": "paired",
            "contrasts[b].test": "one-sample",
            "inference.corrections[holm].method": "holm",
            "inference.corrections[holm].pvalues": "parametric",
            "inference.corrections[holm].level": None,
            "inference.corrections[clusters].method": "cluster",
            "inference.corrections[clusters].forming_p": 0.01,
        },
        "seed": 7,
        "permutations": 99,
        "packages": {
            "famwise": "0.1.0",
            "numpy": "2.4.0",
            "scipy": "1.16.0",
            "numba": "0.62.0",
            "matplotlib": "3.10.0",
        },
        "input_files": {f"data/sub-{i:02d}.npz": {"sha256": f"h{i}", "bytes": 100} for i in range(1, 9)},
        "results": {
            name: {"statistics": {"stat": f"s-{name}", "p": f"p-{name}"}, "corrections": copy.deepcopy(corrections)}
            for name in ("a", "b")
        },
        "results_fingerprint": "0123456789ab" + "0" * 52,
    }


def _text(first, second) -> tuple[list, str]:
    outcomes, found = compare_records(first, second)
    return outcomes, comparison_text(outcomes, found, first=("theirs.json", first), second=("ours.json", second))


def _status(outcomes) -> dict:
    return {f"{o.contrast}/{o.result}": o.status for o in outcomes}


def test_identical_records():
    outcomes, text = _text(_base(), _base())
    assert set(_status(outcomes).values()) == {"identical"}
    assert text.splitlines()[2:] == [
        "a: statistics, holm, clusters: identical",
        "b: statistics, holm, clusters: identical",
        "all 6 results identical",
    ]


def test_same_inputs_and_settings_but_other_numbers_is_a_reproducibility_failure():
    second = _base()
    second["spec_settings"]["inference.shards"] = 4  # results do not depend on the shard count
    second["spec_settings"]["power.studies"] = 400  # nor on the planning section
    second["packages"]["matplotlib"] = "3.11.0"  # nor on the plotting library
    second["results"]["b"]["corrections"]["clusters"]["arrays"]["null"] = "other"
    outcomes, text = _text(_base(), second)
    failed = [o for o in outcomes if o.status != "identical"]
    assert [(o.contrast, o.result, o.failure) for o in failed] == [("b", "clusters", True)]
    assert (
        "b/clusters: different (mask identical; null differ): DIFFERENT NUMBERS from the same inputs, settings, "
        "seed, permutations and library versions: a reproducibility failure"
    ) in text
    assert "note: inference.shards 2 -> 4; power.studies (unset) -> 400 (results do not depend on these)" in text
    assert text.endswith("1 of 6 results differ; 1 of them a REPRODUCIBILITY FAILURE")


def test_library_versions_are_named_and_not_called_a_failure():
    second = _base()
    second["packages"]["numpy"] = "2.5.0"
    second["results"]["a"]["corrections"]["holm"]["arrays"]["p_corrected"] = "p9"
    outcomes, text = _text(_base(), second)
    (changed,) = [o for o in outcomes if o.status != "identical"]
    assert not changed.failure and changed.causes == ["numpy 2.4.0 -> 2.5.0"]
    assert "a/holm: different (mask identical; p_corrected differ): numpy 2.4.0 -> 2.5.0" in text


def test_settings_are_named_only_where_they_can_change_the_result():
    second = _base()
    second["spec_settings"]["inference.corrections[holm].level"] = 0.01
    second["spec_settings"]["contrasts[b].test"] = "paired"
    second["permutations"] = second["spec_settings"]["inference.permutations"] = 199
    for contrast in ("a", "b"):
        for name in ("holm", "clusters"):
            entry = second["results"][contrast]["corrections"][name]
            entry["arrays"]["mask"], entry["n_significant"] = "changed", 2
    second["results"]["b"]["statistics"]["stat"] = "changed"
    outcomes, _ = _text(_base(), second)
    causes = {f"{o.contrast}/{o.result}": o.causes for o in outcomes}
    assert causes["a/holm"] == ["inference.corrections[holm].level null -> 0.01"]
    assert causes["a/clusters"] == ["permutations 99 -> 199"]  # holm's level is not the cluster correction's
    assert causes["b/statistics"] == ["contrasts[b].test one-sample -> paired"]
    assert causes["b/clusters"] == ["contrasts[b].test one-sample -> paired", "permutations 99 -> 199"]
    assert _status(outcomes)["a/statistics"] == "identical"


def test_channel_graph_settings_are_named_for_cluster_results_only():
    first, second = _base(), _base()
    first["spec_settings"]["channels.neighbors.method"] = "delaunay"
    second["spec_settings"]["channels.neighbors.method"] = "distance"
    for name in ("holm", "clusters"):
        second["results"]["a"]["corrections"][name]["arrays"]["p_corrected"] = "changed"
    causes = {o.result: o.causes for o in compare_records(first, second)[0] if o.status == "different"}
    assert causes == {"holm": [], "clusters": ["channels.neighbors.method delaunay -> distance"]}


def test_all_contrasts_family_makes_every_contrast_relevant():
    first, second = _base(), _base()
    for record in (first, second):
        record["spec_settings"]["inference.family"] = "all-contrasts"
    second["spec_settings"]["contrasts[b].test"] = "paired"
    second["results"]["a"]["corrections"]["clusters"]["arrays"]["mask"] = "changed"
    outcomes, _ = _text(first, second)
    (changed,) = [o for o in outcomes if o.status != "identical"]
    assert changed.causes == ["contrasts[b].test one-sample -> paired"]


def test_changed_inputs_are_named_and_long_lists_counted():
    second = _base()
    for i in (2, 3, 4, 5, 6):
        second["input_files"][f"data/sub-{i:02d}.npz"]["sha256"] = "new"
    del second["input_files"]["data/sub-08.npz"]
    second["input_files"]["data/sub-09.npz"] = {"sha256": "x", "bytes": 1}
    second["results"]["a"]["statistics"]["p"] = "changed"
    outcomes, text = _text(_base(), second)
    (changed,) = [o for o in outcomes if o.status != "identical"]
    assert changed.causes == [
        "input data/sub-02.npz changed",
        "input data/sub-03.npz changed",
        "input data/sub-04.npz changed",
        "4 more input files",
    ]
    assert "a/statistics: different (p differ): input data/sub-02.npz changed;" in text


def test_a_result_in_one_record_only():
    second = _base()
    second["results"]["b"]["corrections"]["tfce"] = {"n_significant": 0, "arrays": {"mask": "m"}, "tables": {}}
    del second["results"]["a"]["corrections"]["holm"]
    outcomes, text = _text(_base(), second)
    assert {k: v for k, v in _status(outcomes).items() if v != "identical"} == {
        "a/holm": "only in first",
        "b/tfce": "only in second",
    }
    assert "2 of 7 results differ" in text


def _write(path, record) -> str:
    path.write_text(json.dumps(record | {"results_fingerprint": results_fingerprint(record["results"])}))
    return str(path)


def test_exit_status_and_e_mail_sized_output(tmp_path, capsys):
    first = _write(tmp_path / "theirs.json", _base())
    assert main(["compare", first, _write(tmp_path / "same.json", _base())]) == 0
    second = _base()
    second["seed"] = second["spec_settings"]["seed"] = 8
    second["results"]["a"]["corrections"]["clusters"]["arrays"]["mask"] = "changed"
    capsys.readouterr()
    assert main(["compare", first, _write(tmp_path / "ours.json", second)]) == 1
    out = capsys.readouterr().out
    assert "a/clusters: different (mask differs, 9 -> 9 points): seed 7 -> 8" in out
    assert len(out.splitlines()) <= 6 and max(map(len, out.splitlines()[1:])) < 100


@pytest.mark.parametrize(
    "content, message",
    [
        (None, "theirs.json: no such provenance record"),
        ("{not json", "not a provenance record (invalid JSON at line 1"),
        ("[1, 2]", "not a provenance record (expected a JSON object)"),
        (
            json.dumps({"spec_fingerprint": "f", "packages": {"famwise": "0.0.9"}}),
            "has no result hashes (written by famwise 0.0.9)",
        ),
        (json.dumps({"seed": 1}), "not a famwise provenance record (missing spec_settings, permutations"),
        (json.dumps(_base() | {"results": {"a": {"statistics": {}}}}), "results of contrast 'a' are malformed"),
        (json.dumps(_base()), "theirs.json: the results fingerprint does not match the record's result hashes"),
    ],
)
def test_unusable_records_exit_2(tmp_path, capsys, content, message):
    path = tmp_path / "theirs.json"
    if content is not None:
        path.write_text(content)
    assert main(["compare", str(path), _write(tmp_path / "ours.json", _base())]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_a_study_that_has_not_run_has_no_record(tiny_study, tmp_path, capsys):
    assert main(["compare", _write(tmp_path / "theirs.json", _base()), str(tiny_study)]) == 2
    assert "this study has no provenance record yet" in capsys.readouterr().err
