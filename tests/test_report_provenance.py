"""Provenance: changes when the spec or an input changes, not when nothing did."""

import hashlib
import json
import shutil

import numpy as np
import pytest

from famwise.errors import UserError
from famwise.report import write_provenance
from famwise.report.provenance import TIMESTAMP_KEYS

from report_fixture import study_dict, write_output


def _without_times(record: dict) -> dict:
    return {k: v for k, v in record.items() if k not in TIMESTAMP_KEYS}


@pytest.fixture
def study_folder(tmp_path):
    root = tmp_path / "study"
    (root / "data").mkdir(parents=True)
    for name in ("sub-01.npz", "sub-02.npz"):
        (root / "data" / name).write_bytes(name.encode() * 50)
    (root / "study.yaml").write_text("version: 1\nname: attention alpha\n")
    write_output(root / "results")
    return root


def _record(
    root, out, *, study=None, spec_text=None, started="2026-01-01T00:00:00+00:00", finished="2026-01-01T00:05:00+00:00"
):
    return write_provenance(
        out,
        spec_text=spec_text or (root / "study.yaml").read_text(),
        study=study or study_dict(),
        input_files=sorted((root / "data").glob("*.npz")),
        started=started,
        finished=finished,
        root=root,
        output_dir=root / "results",
    )


def test_same_run_gives_the_same_provenance_apart_from_times(study_folder, tmp_path):
    first = _record(study_folder, tmp_path / "a.json")
    second = _record(
        study_folder, tmp_path / "b.json", started="2027-05-05T10:00:00+00:00", finished="2027-05-05T11:00:00+00:00"
    )
    assert first != second
    assert _without_times(first) == _without_times(second)
    assert json.loads((tmp_path / "a.json").read_text()) == first
    # a collaborator with the study folder elsewhere gets the same record
    moved = shutil.copytree(study_folder, tmp_path / "elsewhere" / "study")
    assert _without_times(_record(moved, tmp_path / "c.json")) == _without_times(first)


def test_provenance_records_fingerprint_versions_seed_and_hashes(study_folder, tmp_path):
    record = _record(study_folder, tmp_path / "p.json")
    canonical = json.dumps(study_dict(), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    # hashlib.sha256 as the reference digest
    assert record["spec_fingerprint"] == hashlib.sha256(canonical.encode()).hexdigest()
    assert record["spec_text"] == (study_folder / "study.yaml").read_text()
    assert record["seed"] == 7 and record["permutations"] == 999
    assert record["packages"]["numpy"] == np.__version__
    assert {"famwise", "scipy", "numba", "matplotlib", "pydantic"} <= set(record["packages"])
    data = (study_folder / "data" / "sub-01.npz").read_bytes()
    assert record["input_files"]["data/sub-01.npz"] == {"sha256": hashlib.sha256(data).hexdigest(), "bytes": len(data)}
    holm = record["results"]["attention"]["corrections"]["holm"]
    assert holm["n_significant"] == 85
    with np.load(study_folder / "results/contrasts/attention/holm/result.npz") as stored:
        mask = stored["mask"]
    # hashlib.sha256 over dtype, shape and C-order bytes, as documented in result_hashes
    assert (
        holm["arrays"]["mask"]
        == hashlib.sha256(f"{mask.dtype.str}|{mask.shape}|".encode() + mask.tobytes()).hexdigest()
    )
    assert {"stat", "p", "df", "effect", "effect_size"} <= set(record["results"]["attention"]["statistics"])
    assert "clusters.tsv" in record["results"]["attention"]["corrections"]["clusters"]["tables"]
    assert len(record["results_fingerprint"]) == 64
    assert record["spec_settings"]["inference.corrections[holm].method"] == "holm"
    assert record["spec_settings"]["inference.corrections[max-stat].step_down"] is True
    assert record["spec_settings"]["contrasts[attention].conditions"] == ["attend", "ignore"]
    assert record["spec_settings"]["subjects.exclude.11"] == "left the session early"
    assert record["started"] == "2026-01-01T00:00:00+00:00"


def test_provenance_changes_with_the_spec(study_folder, tmp_path):
    base = _without_times(_record(study_folder, tmp_path / "a.json"))
    changed = study_dict(alpha=0.01)
    other = _without_times(
        _record(
            study_folder,
            tmp_path / "b.json",
            study=changed,
            spec_text="version: 1\nname: attention alpha\nalpha: 0.01\n",
        )
    )
    assert other["spec_fingerprint"] != base["spec_fingerprint"]
    assert other["spec_text"] != base["spec_text"]
    changed_keys = {"spec_fingerprint", "spec_text", "spec_settings"}
    assert {k: v for k, v in other.items() if k not in changed_keys} == {
        k: v for k, v in base.items() if k not in changed_keys
    }
    differing = {k for k in base["spec_settings"] if base["spec_settings"][k] != other["spec_settings"][k]}
    assert differing == {"inference.alpha"}


def test_provenance_changes_with_an_input_file_or_a_mask(study_folder, tmp_path):
    base = _without_times(_record(study_folder, tmp_path / "a.json"))
    path = study_folder / "data" / "sub-02.npz"
    data = bytearray(path.read_bytes())
    data[10] ^= 1
    path.write_bytes(bytes(data))
    other = _without_times(_record(study_folder, tmp_path / "b.json"))
    assert other["input_files"]["data/sub-02.npz"] != base["input_files"]["data/sub-02.npz"]
    assert other["input_files"]["data/sub-01.npz"] == base["input_files"]["data/sub-01.npz"]
    assert {k: v for k, v in other.items() if k != "input_files"} == {
        k: v for k, v in base.items() if k != "input_files"
    }
    result = study_folder / "results/contrasts/attention/fdr/result.npz"
    with np.load(result) as stored:
        arrays = dict(stored)
    arrays["mask"] = arrays["mask"].copy()
    arrays["mask"][0, 0, 0] = ~arrays["mask"][0, 0, 0]
    np.savez(result, **arrays)
    third = _without_times(_record(study_folder, tmp_path / "c.json"))
    fdr, holm = ([r["results"]["attention"]["corrections"][n] for r in (third, other)] for n in ("fdr", "holm"))
    assert fdr[0]["arrays"]["mask"] != fdr[1]["arrays"]["mask"]
    assert fdr[0]["arrays"]["p_corrected"] == fdr[1]["arrays"]["p_corrected"]
    assert holm[0] == holm[1]
    assert third["results_fingerprint"] != other["results_fingerprint"]


def test_result_hashes_ignore_the_files_zip_metadata_but_not_dtype_or_shape(study_folder, tmp_path):
    base = _record(study_folder, tmp_path / "a.json")
    result = study_folder / "results/contrasts/attention/holm/result.npz"
    with np.load(result) as stored:
        arrays = dict(stored)
    np.savez_compressed(result, **arrays)  # other bytes on disk, same arrays
    again = _record(study_folder, tmp_path / "b.json")
    assert again["results"] == base["results"]
    assert again["results_fingerprint"] == base["results_fingerprint"]
    p = arrays["p_corrected"]
    for changed in (p.astype(np.float32), p.reshape(p.shape[0], -1)):
        np.savez(result, **(arrays | {"p_corrected": changed}))
        other = _record(study_folder, tmp_path / "c.json")
        entry = other["results"]["attention"]["corrections"]["holm"]["arrays"]
        assert entry["p_corrected"] != base["results"]["attention"]["corrections"]["holm"]["arrays"]["p_corrected"]
        assert entry["mask"] == base["results"]["attention"]["corrections"]["holm"]["arrays"]["mask"]


def test_missing_input_file_is_a_user_error(study_folder, tmp_path):
    with pytest.raises(UserError, match=r"expected the input file .*sub-99.npz of this run"):
        write_provenance(
            tmp_path / "p.json",
            spec_text="",
            study=study_dict(),
            input_files=[study_folder / "data" / "sub-99.npz"],
            started=None,
            finished=None,
        )
    assert not (tmp_path / "p.json").exists()
