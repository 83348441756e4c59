"""Per-subject means over significant clusters and TFCE regions (famwise.subject_values)."""

import csv
import json
import re

import numpy as np
import pytest

from famwise.correct.clusters import write_cluster_table
from famwise.decomposition.maps import TimeFreqMaps
from famwise.design import ContrastData, build_contrast
from famwise.jobs import main as job
from famwise.settings import ContrastSettings, SubjectValuesSettings
from famwise.settings_codec import from_plain, to_json
from famwise.subject_values import CAVEAT, region_means, sidecar, subject_value_rows

CHANNELS = ("Fz", "Cz", "Pz", "Oz")
FREQS = np.array([4.0, 6.0, 8.0, 12.0, 20.0])
TIMES = np.round(np.arange(-0.2, 0.81, 0.1), 3)
SUBJECTS = ["01", "02", "03", "04", "05", "06"]


def _row(ident, p, points):
    return {
        "id": ident,
        "sign": "+" if ident > 0 else "-",
        "statistic": 10.0,
        "p": p,
        "n_points": int(points),
        "channels": "Cz",
        "time_start_ms": 0.0,
        "time_end_ms": 100.0,
        "freq_low_hz": 6.0,
        "freq_high_hz": 8.0,
        "peak_stat": 4.0,
        "peak_channel": "Cz",
        "peak_freq_hz": 6.0,
        "peak_time_ms": 0.0,
    }


@pytest.fixture
def stage(tmp_path):
    rng = np.random.default_rng(4)
    files = []
    for subject in SUBJECTS:
        values = rng.normal(size=(2, len(CHANNELS), len(FREQS), len(TIMES))).astype(np.float32)
        maps = TimeFreqMaps(
            values=values,
            conditions=("high", "low"),
            channels=CHANNELS,
            freqs=FREQS,
            times=TIMES,
            measure="power",
            baseline="dB change from -400 to -100 ms",
            n_epochs=np.array([30, 30]),
            valid=np.ones((len(FREQS), len(TIMES)), bool),
        )
        files.append(tmp_path / f"sub-{subject}.npz")
        maps.save(files[-1])
    analysis = {"time_ms": [0.0, 600.0], "freq_hz": [5.0, 21.0], "channels": ["Cz", "Pz", "Oz"]}
    contrast = from_plain(
        ContrastSettings,
        {
            "name": "load",
            "test": "paired",
            "conditions": ["high", "low"],
            "subjects": SUBJECTS,
            "analysis": analysis,
            "groups": None,
            "covariate": None,
        },
    )
    data = build_contrast(files, settings=contrast)
    data.save(tmp_path / "subjects.npz")
    labels = np.zeros(data.shape, np.int32)
    labels[0:2, 0:2, 1:4] = 1  # Cz-Pz, 6-8 Hz, 100-300 ms
    labels[2, 3, 5:] = -1  # Oz, 20 Hz, 500-600 ms
    labels[1, 2, 0] = 2  # not significant (p = 0.4)
    result = tmp_path / "clusters" / "result.npz"
    result.parent.mkdir()
    np.savez(
        result,
        cluster_id=labels,
        method=np.str_("cluster"),
        settings=np.str_(json.dumps({"alpha": 0.05, "correction": {"method": "cluster"}})),
    )
    rows = [
        _row(1, 0.002, (labels == 1).sum()),
        _row(-1, 0.03, (labels == -1).sum()),
        _row(2, 0.4, (labels == 2).sum()),
    ]
    write_cluster_table(result.with_name("clusters.tsv"), rows)
    settings = PAIRED
    out = result.with_name("subject_values.tsv")
    code = job(
        [
            "subject-values",
            "--settings",
            to_json(settings),
            "--subjects",
            str(tmp_path / "subjects.npz"),
            "--result",
            str(result),
            "--out",
            str(out),
            *map(str, files),
        ]
    )
    return {"code": code, "out": out, "files": files, "labels": labels, "settings": settings}


PAIRED = SubjectValuesSettings(
    test="paired", conditions=("high", "low"), group_names=None, covariate_name=None, regions=()
)


def _with_regions(regions: list[dict]) -> SubjectValuesSettings:
    return from_plain(
        SubjectValuesSettings,
        {
            "test": "paired",
            "conditions": ["high", "low"],
            "group_names": None,
            "covariate_name": None,
            "regions": regions,
        },
    )


def test_values_equal_a_direct_mean_over_each_clusters_points(stage):
    assert stage["code"] == 0
    with open(stage["out"], newline="") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    assert list(rows[0]) == ["id", "sign", "p", "n_points", "subject", "high", "low", "contrast"]
    assert [r["id"] for r in rows] == ["1"] * 6 + ["-1"] * 6  # cluster 2 (p 0.4) left out
    # direct computation: the region of the analysis in the full maps, then the mean over the labels
    chans, freqs, times = [1, 2, 3], [1, 2, 3, 4], [2, 3, 4, 5, 6, 7, 8]
    for row in rows:
        with np.load(stage["files"][SUBJECTS.index(row["subject"])]) as tf:
            region = tf["values"][:, chans][:, :, freqs][:, :, :, times]
        inside = stage["labels"] == int(row["id"])
        high, low = region[0][inside].mean(dtype=np.float64), region[1][inside].mean(dtype=np.float64)
        assert float(row["high"]) == pytest.approx(high, abs=1e-12)
        assert float(row["low"]) == pytest.approx(low, abs=1e-12)
        assert float(row["contrast"]) == pytest.approx(high - low, abs=1e-6)  # float32 differences
        assert int(row["n_points"]) == inside.sum()
    sidecar = json.loads(stage["out"].with_suffix(".json").read_text())
    assert sidecar["Caveat"] == CAVEAT and "Kriegeskorte" in CAVEAT
    assert "high minus low" in sidecar["contrast"]["Description"]
    assert "dB change" in sidecar["high"]["Description"]


def test_region_means_is_the_mean_over_labelled_points():
    values = np.arange(12.0).reshape(2, 6)
    labels = np.array([1, 1, 0, -1, 0, -1])
    assert region_means(values, labels, [1, -1]).tolist() == [[0.5, 4.0], [6.5, 10.0]]


def test_a_label_without_points_is_a_user_error(stage, capsys):
    result = stage["out"].with_name("result.npz")
    with np.load(result) as archive:
        arrays = dict(archive)
    arrays["cluster_id"] = np.where(arrays["cluster_id"] == -1, 0, arrays["cluster_id"])
    np.savez(result, **arrays)
    code = job(
        [
            "subject-values",
            "--settings",
            to_json(PAIRED),
            "--subjects",
            str(result.parent.parent / "subjects.npz"),
            "--result",
            str(result),
            "--out",
            str(stage["out"]),
            *map(str, stage["files"]),
        ]
    )
    assert code == 2
    assert "cluster -1 has no point" in capsys.readouterr().err


def test_planned_regions_are_direct_means_over_their_channels_band_and_window(stage):
    regions = [
        {"name": "theta-front", "channels": ["fz", "Cz"], "freq_hz": [4.0, 6.0], "time_ms": [100.0, 300.0]},
        {"name": "late", "channels": ["Oz"], "freq_hz": [10.0, 25.0], "time_ms": [500.0, 800.0]},
    ]
    out = stage["out"].with_name("planned_values.tsv")
    subjects = stage["out"].parent.parent / "subjects.npz"
    settings = _with_regions(regions)
    code = job(
        [
            "planned-values",
            "--settings",
            to_json(settings),
            "--subjects",
            str(subjects),
            "--out",
            str(out),
            *map(str, stage["files"]),
        ]
    )
    assert code == 0
    with open(out, newline="") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    assert [r["id"] for r in rows] == ["theta-front"] * 6 + ["late"] * 6
    # direct computation on the full maps: Fz, Cz = channels 0, 1; 4-6 Hz = freqs 0, 1; 100-300 ms = times 3-5
    cells = {"theta-front": np.ix_([0, 1], [0, 1], [3, 4, 5]), "late": np.ix_([3], [3, 4], [7, 8, 9, 10])}
    for row in rows:
        with np.load(stage["files"][SUBJECTS.index(row["subject"])]) as tf:
            high, low = (tf["values"][k][cells[row["id"]]].mean(dtype=np.float64) for k in (0, 1))
        assert float(row["high"]) == pytest.approx(high, abs=1e-12)
        assert float(row["contrast"]) == pytest.approx(high - low, abs=1e-12)
    assert rows[0]["n_points"] == "12" and rows[-1]["n_points"] == "8"
    sidecar = json.loads(out.with_suffix(".json").read_text())
    assert sidecar["id"]["Levels"]["late"] == "Oz; 10 to 25 Hz; 500 to 800 ms"


@pytest.mark.parametrize(
    "change, message",
    [
        ({"channels": ["Fz", "Qz"]}, r"planned_regions\[0\] \('r'\).channels: unknown channels \['Qz'\]"),
        ({"freq_hz": [40.0, 50.0]}, r"planned_regions\[0\] \('r'\).freq_hz: no decomposed frequency"),
        ({"time_ms": [900.0, 950.0]}, r"planned_regions\[0\] \('r'\).time_ms: no time point"),
    ],
)
def test_planned_region_outside_the_data_is_a_user_error(stage, capsys, change, message):
    region = {"name": "r", "channels": ["Fz"], "freq_hz": [4.0, 6.0], "time_ms": [0.0, 100.0]} | change
    settings = _with_regions([region])
    code = job(
        [
            "planned-values",
            "--settings",
            to_json(settings),
            "--subjects",
            str(stage["out"].parent.parent / "subjects.npz"),
            "--out",
            str(stage["out"].with_name("x.tsv")),
            *map(str, stage["files"]),
        ]
    )
    assert code == 2
    assert re.search(message, capsys.readouterr().err)


@pytest.mark.workflow
def test_workflow_writes_cluster_and_planned_values_and_the_report_shows_them(tmp_path):
    from famwise.cli import main as famwise

    from conftest import write_tiny_study

    spec = write_tiny_study(tmp_path, corrections="- method: cluster\n  forming_p: 0.05\n- method: tfce\n")
    spec.write_text(
        spec.read_text() + "planned_regions:\n  - {name: burst, channels: [Fz, FC1], freq_hz: [6, 8], "
        "time_ms: [200, 600]}\n"
    )
    assert famwise(["run", str(spec), "--cores", "2"]) == 0
    folder = tmp_path / "results" / "contrasts" / "high-vs-low"
    for label in ("cluster", "tfce"):
        with open(folder / label / "clusters.tsv", newline="") as handle:
            significant = [r["id"] for r in csv.DictReader(handle, delimiter="\t") if float(r["p"]) <= 0.05]
        with open(folder / label / "subject_values.tsv", newline="") as handle:
            rows = list(csv.DictReader(handle, delimiter="\t"))
        assert significant, label  # the injected 7 Hz burst
        assert [r["id"] for r in rows] == [i for i in significant for _ in range(6)]
    with open(folder / "planned_values.tsv", newline="") as handle:
        planned = list(csv.DictReader(handle, delimiter="\t"))
    assert [r["id"] for r in planned] == ["burst"] * 6
    assert np.mean([float(r["contrast"]) for r in planned]) > 0  # high above low over the burst
    html = (tmp_path / "results" / "report" / "index.html").read_text(encoding="utf-8")
    assert html.count('class="explorer"') == 1 and "Planned regions" in html


def test_a_correlation_keeps_each_subjects_covariate_beside_the_values():
    data = ContrastData(
        x=np.arange(12, dtype=np.float32).reshape(3, 4),
        test="correlation",
        subjects=("a", "b", "c"),
        channels=("Cz",),
        freqs=np.array([6.0]),
        times=np.array([0.0, 0.1, 0.2, 0.3]),
        covariate=np.array([31.0, 24.0, 27.5]),
    )
    labels = np.array([1, 1, 0, 0])
    lines = subject_value_rows(
        data, np.zeros((3, 1, 1)), ["high"], [{"id": 1, "sign": "+", "p": 0.01, "n_points": 2}], labels, None
    )
    assert [line["covariate"] for line in lines] == [31.0, 24.0, 27.5]
    assert [line["contrast"] for line in lines] == [0.5, 4.5, 8.5]
    assert (
        "age"
        in sidecar("correlation", ["high"], "power", noun="cluster", grouped=False, covariate="age")["covariate"][
            "Description"
        ]
    )
