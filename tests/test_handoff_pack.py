"""famwise pack: the archive's content and manifest; the receiving side's check of the manifest."""

import hashlib
import json
import zipfile

import numpy as np
import pytest

from famwise.cli import main
from famwise.handoff.manifest import verify_manifest

from conftest import TINY_CHANNELS


@pytest.fixture
def study(tiny_study):
    """The tiny study with its electrode positions in a TSV file of its own (invented coordinates, mm)."""
    folder = tiny_study.parent
    (folder / "electrodes").mkdir()
    rows = "".join(f"{name}\t{10.0 * i}\t{5.0 * i}\t80\n" for i, name in enumerate(TINY_CHANNELS))
    (folder / "electrodes" / "cap.tsv").write_text("name\tx\ty\tz\n" + rows)
    tiny_study.write_text(tiny_study.read_text().replace("positions: 10-10", "positions: electrodes/cap.tsv"))
    return tiny_study


def _unpack(archive, folder):
    with zipfile.ZipFile(archive) as handle:
        handle.extractall(folder)
    return folder / archive.stem / "study.yaml"


def test_pack_without_data_holds_spec_channel_file_and_manifest(study, tmp_path, capsys):
    archive = tmp_path / "out" / "lantern-handoff.zip"
    assert main(["pack", str(study), str(archive)]) == 0
    assert "a manifest of 6 data files" in capsys.readouterr().out
    with zipfile.ZipFile(archive) as handle:
        names = sorted(handle.namelist())
        manifest = json.loads(handle.read("lantern-handoff/study.manifest.json"))
    assert names == [
        "lantern-handoff/electrodes/cap.tsv",
        "lantern-handoff/study.manifest.json",
        "lantern-handoff/study.yaml",
    ]
    data = (study.parent / "data" / "sub-04.npz").read_bytes()
    # hashlib.sha256 as the reference digest
    assert manifest["files"]["data/sub-04.npz"] == {
        "role": "data",
        "bytes": len(data),
        "sha256": hashlib.sha256(data).hexdigest(),
    }
    assert manifest["files"]["electrodes/cap.tsv"]["role"] == "channels"
    assert sorted(manifest["files"]) == [
        "data/sub-01.npz",
        "data/sub-02.npz",
        "data/sub-03.npz",
        "data/sub-04.npz",
        "data/sub-05.npz",
        "data/sub-06.npz",
        "electrodes/cap.tsv",
    ]
    assert manifest["data_included"] is False
    assert manifest["spec_sha256"] == hashlib.sha256(study.read_bytes()).hexdigest()


def test_receiving_side_names_missing_and_changed_files(study, tmp_path, capsys):
    archive = tmp_path / "handoff.zip"
    assert main(["pack", str(study), str(archive)]) == 0
    spec = _unpack(archive, tmp_path / "received")
    (spec.parent / "data").mkdir()
    for number in (1, 2, 3, 4, 5):
        (spec.parent / "data" / f"sub-0{number}.npz").write_bytes(
            (study.parent / "data" / f"sub-0{number}.npz").read_bytes()
        )
    changed = bytearray((spec.parent / "data" / "sub-02.npz").read_bytes())
    changed[-100] ^= 1
    (spec.parent / "data" / "sub-02.npz").write_bytes(bytes(changed))
    (spec.parent / "data" / "sub-03.npz").write_bytes(b"short")
    capsys.readouterr()
    for command in ("check", "run"):
        assert main([command, str(spec)]) == 2
        err = capsys.readouterr().err
        assert (
            "study.manifest.json: 3 of 7 files differ from the packed study: data/sub-02.npz changed (same size, "
            "other content); data/sub-03.npz changed (5 bytes, packed"
        ) in err
        assert "data/sub-06.npz missing" in err and "Traceback" not in err
    assert not (spec.parent / "results" / "tf").exists()


def test_pack_with_data_unpacks_to_a_study_that_checks(study, tmp_path, capsys):
    archive = tmp_path / "handoff.zip"
    assert main(["pack", str(study), str(archive), "--with-data"]) == 0
    spec = _unpack(archive, tmp_path / "received")
    assert verify_manifest(spec) == ("the 7 files listed in study.manifest.json are as packed (sizes and SHA-256)", [])
    capsys.readouterr()
    assert main(["check", str(spec)]) == 0
    assert "are as packed" in capsys.readouterr().err
    spec.write_text(spec.read_text().replace("alpha: 0.05", "alpha: 0.01"))
    assert verify_manifest(spec)[1] == [
        "study.yaml was edited after it was packed; results may differ from the sender's"
    ]


def test_pack_names_files_as_the_spec_does_through_a_linked_data_folder(study, tmp_path, capsys):
    elsewhere = tmp_path / "big-disk" / "eeg"
    elsewhere.parent.mkdir()
    (study.parent / "data").rename(elsewhere)
    (study.parent / "data").symlink_to(elsewhere, target_is_directory=True)
    archive = tmp_path / "handoff.zip"
    assert main(["pack", str(study), str(archive), "--with-data"]) == 0
    with zipfile.ZipFile(archive) as handle:
        assert "handoff/data/sub-01.npz" in handle.namelist()
        assert "data/sub-01.npz" in json.loads(handle.read("handoff/study.manifest.json"))["files"]


def test_pack_writes_zip_archives_only(study, tmp_path, capsys):
    assert main(["pack", str(study), str(tmp_path / "handoff.tar")]) == 2
    assert "the archive must be a .zip file" in capsys.readouterr().err
    assert not (tmp_path / "handoff.tar").exists()


def test_a_malformed_manifest_is_a_user_error(study, capsys):
    (study.parent / "study.manifest.json").write_text('{"files": 3}')
    assert main(["check", str(study)]) == 2
    assert "study.manifest.json: not a famwise manifest" in capsys.readouterr().err


BIDS_SPEC = """\
version: 1
name: bids hand-off
subjects: {source: bids, path: data, task: view, exclude: {"03": noisy}}
conditions: {face: [face], house: [house]}
channels: {positions: bids}
contrasts: [{name: faces, test: paired, conditions: [face, house]}]
inference: {corrections: [{method: holm}]}
"""


def test_bids_study_files_are_recordings_sidecars_electrodes_and_participants(tmp_path):
    from famwise import bids_writing
    from famwise.handoff.inputs import study_files
    from famwise.plan import Plan

    rng = np.random.default_rng(0)
    events = [(1.0 + 1.2 * i, 0.0, ("face", "house")[i % 2]) for i in range(10)]
    for subject in ("01", "02", "03"):
        bids_writing.write_subject(
            tmp_path / "data",
            subject,
            data=rng.normal(0, 2e-5, (2, 4000)),
            sample_rate_hz=250.0,
            channels=["Fz", "Cz"],
            events=events,
            task="view",
            electrodes={"Fz": (0.0, 60.0, 70.0), "Cz": (0.0, 0.0, 95.0)},
        )
        bids_writing.write_subject(
            tmp_path / "data",
            subject,
            data=rng.normal(0, 2e-5, (2, 4000)),
            sample_rate_hz=250.0,
            channels=["Fz", "Cz"],
            events=events,
            task="rest",
        )
    bids_writing.write_participants(tmp_path / "data", [{"participant_id": f"sub-{s}"} for s in ("01", "02", "03")])
    (tmp_path / "study.yaml").write_text(BIDS_SPEC)
    files = study_files(Plan.from_spec(tmp_path / "study.yaml"))
    names = sorted(files.data_files)
    assert "data/participants.tsv" in names and files.channel_files == {}
    assert {
        "data/sub-01/eeg/sub-01_electrodes.tsv",
        "data/sub-02/eeg/sub-02_task-view_eeg.edf",
        "data/sub-02/eeg/sub-02_task-view_events.tsv",
        "data/sub-02/eeg/sub-02_task-view_channels.tsv",
    } <= set(names)
    assert not [n for n in names if "sub-03" in n or "task-rest" in n]  # excluded subject, other task
    assert all(files.data_files[n] == (tmp_path / n).resolve() for n in names)
