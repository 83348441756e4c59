"""The study spec: validation, messages with file, line and key, the README reference."""

from pathlib import Path

import pydantic
import pytest

from famwise.errors import UserError
from famwise.spec import load_study
from famwise.spec.reference import BEGIN, END, reference_markdown

VALID = """\
version: 1
name: spec test
subjects:
  source: epochs
  path: data/sub-{subject}.npz
conditions:
  high-load: [high]
  low-load: [low]
contrasts:
  - name: load
    test: paired
    conditions: [high-load, low-load]
inference:
  corrections:
    - method: holm
"""


def _error(tmp_path: Path, text: str) -> str:
    spec = tmp_path / "study.yaml"
    spec.write_text(text)
    with pytest.raises(UserError) as caught:
        load_study(spec)
    return str(caught.value)


def test_valid_spec_loads_frozen(tmp_path):
    spec = tmp_path / "study.yaml"
    spec.write_text(VALID)
    loaded = load_study(spec)
    assert loaded.study.contrasts[0].conditions == ["high-load", "low-load"]
    assert loaded.output == (tmp_path / "results").resolve()
    with pytest.raises(pydantic.ValidationError, match="frozen"):
        loaded.study.seed = 3


def test_unknown_key_has_line_and_hint(tmp_path):
    text = VALID.replace("    - method: holm\n", "    - method: fdr-bh\n      levle: 0.1\n")
    assert (
        _error(tmp_path, text)
        == "study.yaml:16 inference.corrections[0].levle: unknown key 'levle' (did you mean 'level'?)"
    )


def test_unknown_condition_example_of_the_issue(tmp_path):
    text = VALID.replace("conditions: [high-load, low-load]", "conditions: [hi-load, low-load]")
    message = _error(tmp_path, text)
    assert message.startswith(
        "study.yaml:12 contrasts[0].conditions: unknown condition 'hi-load' (known: high-load, low-load)"
    )


def test_wrong_type_names_value(tmp_path):
    text = VALID.replace("inference:\n", "inference:\n  permutations: many\n")
    assert "study.yaml:14 inference.permutations:" in _error(tmp_path, text)
    assert "'many'" in _error(tmp_path, text)


def test_unknown_top_level_key(tmp_path):
    assert _error(tmp_path, VALID + "sead: 3\n") == "study.yaml:16 sead: unknown key 'sead' (did you mean 'seed'?)"


def test_unknown_choice_has_hint(tmp_path):
    text = VALID.replace("test: paired", "test: pared")
    message = _error(tmp_path, text)
    assert message.startswith("study.yaml:11 contrasts[0].test: got 'pared'") and "did you mean 'paired'" in message


def test_unknown_correction_method(tmp_path):
    message = _error(tmp_path, VALID.replace("method: holm", "method: holmes"))
    assert (
        message.startswith("study.yaml:15 inference.corrections[0]: unknown method 'holmes'")
        and "did you mean 'holm'" in message
    )


def test_two_sample_without_groups(tmp_path):
    text = VALID.replace(
        "test: paired\n    conditions: [high-load, low-load]", "test: two-sample\n    conditions: [high-load]"
    )
    assert "contrasts[0].groups: test 'two-sample' needs groups" in _error(tmp_path, text)


def test_unknown_group(tmp_path):
    text = VALID.replace(
        "  path: data/sub-{subject}.npz\n", "  path: data/sub-{subject}.npz\n  groups: {'01': young, '02': old}\n"
    )
    text = text.replace(
        "test: paired\n    conditions: [high-load, low-load]",
        "test: two-sample\n    conditions: [high-load]\n    groups: [young, elder]",
    )
    assert "contrasts[0].groups: unknown group 'elder' (known: old, young)" in _error(tmp_path, text)


def test_duplicate_contrast_names(tmp_path):
    text = VALID.replace("inference:", "  - name: load\n    test: one-sample\n    conditions: [high-load]\ninference:")
    assert "study.yaml:13 contrasts[1].name: duplicate contrast name 'load'" in _error(tmp_path, text)


def test_duplicate_correction_names(tmp_path):
    text = VALID + "    - method: holm\n"
    assert "inference.corrections[1].name: two corrections are named 'holm'" in _error(tmp_path, text)


def test_subject_id_not_identifier(tmp_path):
    text = VALID.replace("  path: data/sub-{subject}.npz\n", "  path: data/sub-{subject}.npz\n  ids: ['01', '../x']\n")
    message = _error(tmp_path, text)
    assert message.startswith("study.yaml:6 subjects.ids: subject id '../x' is not a plain identifier")


def test_path_leaving_study_folder(tmp_path):
    text = VALID.replace("path: data/sub-{subject}.npz", "path: ../elsewhere/sub-{subject}.npz")
    assert "study.yaml:5 subjects.path: path '../elsewhere/sub-{subject}.npz' leaves the study folder" in _error(
        tmp_path, text
    )


def test_missing_required_key(tmp_path):
    assert _error(tmp_path, VALID.replace("name: spec test\n", "")) == "study.yaml:1 name: required key is missing"


def test_yaml_syntax_error(tmp_path):
    message = _error(tmp_path, VALID.replace("  high-load: [high]", "  high-load: [high"))
    assert message.startswith("study.yaml:8: not valid YAML")


def test_version_must_be_one(tmp_path):
    assert _error(tmp_path, VALID.replace("version: 1", "version: 2")).startswith("study.yaml:1 version: got 2")


def test_pattern_needs_subject_placeholder(tmp_path):
    assert "subjects.path: pattern 'data/all.npz' must contain '{subject}'" in _error(
        tmp_path, VALID.replace("data/sub-{subject}.npz", "data/all.npz")
    )


def test_missing_spec_file(tmp_path):
    with pytest.raises(UserError, match="spec file not found"):
        load_study(tmp_path / "absent.yaml")


def test_readme_spec_reference_is_current():
    readme = (Path(__file__).parents[1] / "README.md").read_text(encoding="utf-8")
    committed = readme[readme.index(BEGIN) : readme.index(END) + len(END)]
    assert committed == reference_markdown(), (
        "README spec reference is out of date: run `python -m famwise.spec.reference --write README.md`"
    )


def test_every_field_has_a_description():
    from famwise.spec import models

    for model in (
        models.Study,
        models.Subjects,
        models.EpochWindow,
        models.FrequencyGrid,
        models.Baseline,
        models.Decomposition,
        models.Analysis,
        models.Neighbors,
        models.Channels,
        models.Contrast,
        models.Inference,
        models.PValueCorrection,
        models.MaxStatCorrection,
        models.ClusterCorrection,
        models.TFCECorrection,
    ):
        for name, field in model.model_fields.items():
            assert field.description, f"{model.__name__}.{name} has no description"


def test_example_study_spec_is_valid_and_packaged():
    root = Path(__file__).parents[1]
    example = root / "example_study" / "study.yaml"
    load_study(example)
    assert example.read_text() == (root / "workflow" / "famwise" / "data" / "example_study.yaml").read_text()


def test_a_misspelt_required_key_is_reported_at_the_typo(tmp_path):
    # an unrelated unknown key earlier in the file does not hide the typo of the missing key
    text = VALID.replace("contrasts:", "contrast:").replace("\n", "\nsead: 3\n", 1)
    message = _error(tmp_path, text)
    line = text.splitlines().index("contrast:") + 1
    assert f"study.yaml:{line} contrast: unknown key 'contrast' (did you mean 'contrasts'?)" in message


def test_spec_defaults_live_in_the_model_fields(tmp_path):
    """The Morlet width (7 cycles) and forming_p (0.01) defaults are resolved by the model, not later."""
    from famwise.spec.models import ClusterCorrection, Decomposition

    assert Decomposition().cycles == 7.0 and Decomposition().fwhm_ms is None
    assert Decomposition(fwhm_ms=300.0).cycles is None
    assert Decomposition(method="multitaper", taper_length_ms=400.0, nw=2.0).cycles is None
    assert ClusterCorrection(method="cluster").forming_p == 0.01
    assert ClusterCorrection(method="cluster", forming_stat=3.0).forming_p is None


def test_methods_paragraph_states_the_default_wavelet_width():
    from famwise.report.methods import _decomposition
    from famwise.spec.models import Decomposition

    study = {"subjects": {"source": "epochs"}, "decomposition": Decomposition().model_dump(mode="json")}
    assert "with 7 cycles" in _decomposition(study)
