"""A regression contrast from a spec: covariates in the spec, the check's words, and one run end to end."""

import json

import numpy as np
import pytest
import statsmodels.api as sm

from famwise.cli import main
from famwise.design import load_contrast
from famwise.errors import UserError
from famwise.plan import Plan
from famwise.regression_words import check_line
from famwise.spec import load_study

from conftest import write_tiny_study

AGES = [31, 45, 28, 52, 39, 60, 24, 47]
SEXES = ["F", "M", "M", "F", "F", "M", "F", "M"]

REGRESSION = """\
  - name: age-effect
    test: regression
    conditions: [high, low]
    covariate: age
    nuisance: [sex]
"""


def _regression_study(folder, *, permutations=99, ages=AGES):
    spec = write_tiny_study(folder, n_subjects=8, permutations=permutations, corrections="- method: max-stat\n")
    text = spec.read_text()
    covariates = (
        "  covariates:\n"
        f"    age: {json.dumps({f'{i:02d}': a for i, a in enumerate(ages, start=1)})}\n"
        f"    sex: {json.dumps({f'{i:02d}': s for i, s in enumerate(SEXES, start=1)})}\n"
    )
    text = text.replace("  min_epochs: 5\n", "  min_epochs: 5\n" + covariates)
    text = text.replace("contrasts:\n", "contrasts:\n" + REGRESSION)
    spec.write_text(text)
    return spec


def test_plan_codes_the_design_and_check_explains_it(tmp_path):
    plan = Plan.from_spec(_regression_study(tmp_path))
    settings = plan.contrast_settings("age-effect")
    assert settings.covariate == tuple(float(a) for a in AGES)
    assert settings.nuisance_columns == ("sex=M",)
    assert [row[0] for row in settings.nuisance] == [float(s == "M") for s in SEXES]
    line = check_line(plan, plan.contrast("age-effect"))
    assert line.startswith(
        "regression: (high - low) power ~ age + sex, testing age, 8 subjects, df 5, 99 Freedman-Lane permutations"
    )
    assert "reference level F" in line


def test_spec_errors_name_the_key_and_the_subject(tmp_path):
    spec = _regression_study(tmp_path)
    text = spec.read_text()
    spec.write_text(text.replace("nuisance: [sex]", "nuisance: [site]"))
    with pytest.raises(UserError, match=r"contrasts\[0\]\.nuisance.*unknown covariate 'site'"):
        load_study(spec)
    spec.write_text(text.replace('"03": 28', '"03": null'))
    with pytest.raises(UserError, match="subject 03 has no value of covariate 'age'"):
        Plan.from_spec(spec)
    spec.write_text(text.replace("    test: paired\n", "    test: paired\n    nuisance: [sex]\n"))
    with pytest.raises(UserError, match="only used by 'regression'"):
        load_study(spec)


def test_check_refuses_yuen_for_a_regression_at_the_statistic_key(tmp_path, capsys):
    spec = _regression_study(tmp_path)
    spec.write_text(spec.read_text().replace("inference:\n", "inference:\n  statistic: yuen\n"))
    line = spec.read_text().splitlines().index("  statistic: yuen") + 1
    assert main(["check", str(spec)]) == 2
    err = capsys.readouterr().err
    assert f"study.yaml:{line} inference.statistic: 'yuen'" in err
    assert "not for contrast age-effect's 'regression'" in err and "Traceback" not in err
    assert not (tmp_path / "results").exists()


@pytest.mark.workflow
def test_regression_runs_end_to_end(tmp_path):
    spec = _regression_study(tmp_path)
    assert main(["run", str(spec), "--cores", "2"]) == 0
    out = tmp_path / "results" / "contrasts" / "age-effect"
    data = load_contrast(out / "subjects.npz")
    with np.load(out / "observed.npz") as observed:
        stat, df = observed["stat"].reshape(-1), float(observed["df"])
    # Source: statsmodels.api.OLS on the subjects' (high - low) maps with age and the sex indicator.
    design = sm.add_constant(np.column_stack([AGES, [float(s == "M") for s in SEXES]]))
    for point in (0, stat.size // 2, stat.size - 1):
        fit = sm.OLS(data.x[:, point].astype(np.float64), design).fit()
        assert stat[point] == pytest.approx(fit.tvalues[1], rel=1e-4)
    assert df == 5
    info = json.loads((out / "nulls" / "info.json").read_text())
    assert info["scheme"] == "freedman-lane" and info["n_rows"] == 100
    methods = (tmp_path / "results" / "report" / "methods.md").read_text()
    assert "Freedman & Lane (1983; Winkler et al. 2014)" in methods
    assert "sex (categorical, indicator columns for M; reference level F)" in methods
    assert "Winkler AM, Ridgway GR" in methods


def test_init_offers_a_regression_on_numeric_participant_columns(tmp_path):
    from test_preflight_bids import write_bids_study

    from famwise import bids_writing

    write_bids_study(tmp_path, 6)
    (tmp_path / "study.yaml").unlink()
    rows = [
        {"participant_id": f"{i:02d}", "age": str(a), "sex": s, "handedness": "right"}
        for i, (a, s) in enumerate(zip(AGES, SEXES), start=1)
        if i <= 6
    ]
    bids_writing.write_participants(tmp_path / "data", rows)
    assert main(["init", str(tmp_path / "data"), "--out", str(tmp_path / "study.yaml")]) == 0
    text = (tmp_path / "study.yaml").read_text()
    assert "participants.tsv has numeric columns (age)" in text
    offered = text.replace("  # - name", "  - name").replace("  #   ", "    ")  # uncomment the offer
    (tmp_path / "study.yaml").write_text(offered)
    plan = Plan.from_spec(tmp_path / "study.yaml")  # covariates read from participants.tsv
    settings = plan.contrast_settings("age-effect")
    assert settings.covariate == tuple(float(a) for a in AGES[:6])
    assert settings.nuisance_columns == ("sex=M",)  # handedness is the same for everyone: not offered


def test_methods_name_one_or_several_nuisance_covariates_grammatically():
    from types import SimpleNamespace

    from famwise.report.regression_methods import regression_sentence

    contrast = SimpleNamespace(name="c", design_terms=["age (numeric)"], df=np.array(5.0), tail="two-sided", n=8)
    spec = {"conditions": ["high"], "covariate": "age", "nuisance": ["sex"]}
    text = regression_sentence(contrast, spec, {})
    assert "coefficient in a model with an intercept and sex as nuisance covariate (age" in text
    text = regression_sentence(contrast, spec | {"nuisance": ["sex", "site"]}, {})
    assert "an intercept and sex, site as nuisance covariates (" in text
    assert "an intercept (" in regression_sentence(contrast, spec | {"nuisance": None}, {})
