"""Every mistake that can be known before the first job is caught by `check` and by `run` up front.

Each case breaks the tiny epochs study (conftest) in one way. `check` must end with
exit status 2 and one line naming the file and the key or line (or the subject and
file), without a traceback and without writing a file; `run` must stop before
Snakemake starts, so no result file exists.
"""

import gzip
from pathlib import Path

import numpy as np
import pytest

import famwise.cli
import famwise.io
from famwise.cli import main

from conftest import write_tiny_study, write_tiny_subject


def _edit(old, new, count=1):
    def apply(folder: Path):
        spec = folder / "study.yaml"
        text = spec.read_text()
        assert old in text, old
        spec.write_text(text.replace(old, new, count))

    return apply


def _bytes(content: bytes):
    def apply(folder: Path):
        (folder / "study.yaml").write_bytes(content)

    return apply


def _subject(name, **options):
    def apply(folder: Path):
        write_tiny_subject(folder / "data" / f"sub-{name}.npz", np.random.default_rng(11), **options)

    return apply


def _nan_free_but_missing_key(folder: Path):
    np.savez(folder / "data" / "sub-03.npz", data=np.zeros((2, 8, 10)))


def _edges(folder: Path):
    (folder / "edges.tsv").write_text("channel_a\tchannel_b\nFz\tFCz\nCz\tC3\n")
    _edit("  positions: 10-10\n", "  positions: 10-10\n  neighbors: {method: edges, edges_file: edges.tsv}\n")(folder)
    _edit("- method: holm\n", "- method: holm\n    - method: cluster\n")(folder)


def _edf_renamed(folder: Path):
    header = b"0       " + b" " * 176 + b"512     " + b" " * 44 + b"1       1       1   "
    (folder / "study.yaml").write_bytes(header + bytes(range(256)) * 4)


RANDOM = np.random.default_rng(5).integers(0, 256, 4000, dtype=np.uint8).tobytes()
TWO_SAMPLE = (
    "  min_epochs: 5\n  groups: {'01': a, '02': a, '03': a, '04': a, '05': a, '06': b}\n",
    "  - name: groups\n    test: two-sample\n    conditions: [high]\n    groups: [a, b]\ninference:",
)

# (id, break the study, fragments the one error line must hold)
CASES = [
    (
        "exclude-unknown-id",
        _edit("  min_epochs: 5\n", "  min_epochs: 5\n  exclude: {'7': asleep}\n"),
        ["study.yaml:8 subjects.exclude.7", "no subject '7' was found", "01, 02, 03, 04, 05, 06"],
    ),
    (
        "misspelt-required-key",
        _edit("contrasts:", "contrast:"),
        ["study.yaml:18 contrast: unknown key 'contrast' (did you mean 'contrasts'?)"],
    ),
    (
        "duplicate-key",
        _edit("  alpha: 0.05\n", "  alpha: 0.05\n  alpha: 0.01\n"),
        ["study.yaml:24 inference.alpha: key given twice (lines 23 and 24)"],
    ),
    (
        "duplicate-top-key",
        _edit("seed: 7\n", "seed: 7\nseed: 8\n"),
        ["study.yaml:4 seed: key given twice (lines 3 and 4)"],
    ),
    ("random-bytes", _bytes(RANDOM), ["study.yaml: not a text file"]),
    ("gzip", _bytes(gzip.compress(b"version: 1\n" * 50)), ["study.yaml: not a text file"]),
    ("edf-renamed", _edf_renamed, ["study.yaml: not a text file"]),
    ("nul-bytes", _bytes(b"version: 1\n\0\0\0"), ["study.yaml"]),
    (
        "label-in-no-recording",
        _edit("low: [low]", "low: [loww]"),
        ["study.yaml:10 conditions.low", "'loww'", "(did you mean 'low'?)"],
    ),
    (
        "time-in-edge-zone",
        _edit("channels:\n", "analysis:\n  time_ms: [-600, 900]\nchannels:\n"),
        ["study.yaml:17 analysis.time_ms: [-600.0, 900.0] ms reaches into", "widest window that fits is"],
    ),
    (
        "no-time-in-window",
        _edit("channels:\n", "analysis:\n  time_ms: [2000, 3000]\nchannels:\n"),
        ["study.yaml:17 analysis.time_ms: no time point"],
    ),
    (
        "frequency-at-nyquist",
        _edit("highest_hz: 14", "highest_hz: 50"),
        ["study.yaml:12 decomposition.frequencies.highest_hz: 50 Hz is not below the Nyquist frequency 50 Hz"],
    ),
    (
        "baseline-outside-epoch",
        _edit("window_ms: [-400, -200]", "window_ms: [-900, -200]"),
        ["study.yaml:15 decomposition.baseline.window_ms: [-900, -200] ms lies outside the epoch (-600 to 990 ms)"],
    ),
    (
        "baseline-without-points",
        _edit("window_ms: [-400, -200]", "window_ms: [-390, -360]"),
        ["study.yaml:15 decomposition.baseline.window_ms", "0 output time points"],
    ),
    ("negative-cycles", _edit("cycles: 3", "cycles: [-3, 8]"), ["study.yaml:13 decomposition.cycles", "positive"]),
    ("zero-fwhm", _edit("cycles: 3", "fwhm_ms: 0"), ["study.yaml:13 decomposition.fwhm_ms", "positive"]),
    (
        "wavelets-longer-than-epoch",
        _edit("cycles: 3", "cycles: 40"),
        ["study.yaml:13 decomposition.cycles: the Morlet wavelet"],
    ),
    (
        "time-step-off-grid",
        _edit("time_step_ms: 50", "time_step_ms: 15"),
        ["study.yaml:14 decomposition.time_step_ms: time_step_ms must be a positive multiple"],
    ),
    (
        "min-epochs-above-every-condition",
        _edit("min_epochs: 5", "min_epochs: 30"),
        ["study.yaml:7 subjects.min_epochs: 30 is more than condition 'high' has in any subject (at most 12 epochs)"],
    ),
    (
        "condition-with-too-few-epochs",
        _subject("04", n_per_condition=3),
        ["study.yaml:7 subjects.min_epochs: subject 04 has 3 epochs of condition 'high', fewer than 5"],
    ),
    ("edge-list-unknown-channel", _edges, ["study.yaml:18 channels.neighbors.edges_file", "FCz"]),
    (
        "analysis-channel-unknown",
        _edit("channels:\n", "analysis:\n  channels: [Fz, Fpz]\nchannels:\n"),
        ["study.yaml:17 analysis.channels: not in the data: Fpz"],
    ),
    (
        "shards-above-rows",
        _edit("shards: 2", "shards: 5000"),
        ["study.yaml:25 inference.shards: 5000 shards for the 64 rows"],
    ),
    (
        "group-of-one",
        lambda f: [_edit(TWO_SAMPLE[0][:15], TWO_SAMPLE[0])(f), _edit("inference:", TWO_SAMPLE[1])(f)],
        ["study.yaml:27 contrasts[1].groups: group 'b' has 1 analysed subject (06)"],
    ),
    (
        "channels-differ",
        _subject("03", channels=["Fz", "FC1", "FC2", "Cz", "C3", "C4", "Pz", "POz"]),
        ["subject 03: channels differ from subject 01", "extra: POz; missing: Oz", "sub-03.npz"],
    ),
    (
        "sampling-rates-differ",
        _subject("02", sample_rate_hz=200.0),
        ["subject 02: sampling rate 200 Hz differs from subject 01 (100 Hz) in ", "sub-02.npz"],
    ),
    (
        "epochs-file-missing-key",
        _nan_free_but_missing_key,
        ["subject 03", "sub-03.npz", "missing key(s) sample_rate_hz"],
    ),
    ("wrong-type", _edit("alpha: 0.05", "alpha: lots"), ["study.yaml:23 inference.alpha"]),
    (
        "unknown-condition",
        _edit("conditions: [high, low]", "conditions: [high, lo]"),
        ["study.yaml:21 contrasts[0].conditions: unknown condition 'lo'"],
    ),
    (
        "subject-file-missing",
        _edit("  min_epochs: 5", "  min_epochs: 5\n  ids: ['01', '02', '09']"),
        ["subject 09: file not found", "subjects.path"],
    ),
    (
        "subject-id-not-plain",
        _edit("  min_epochs: 5", "  min_epochs: 5\n  ids: ['01', 'sub 2']"),
        ["study.yaml:8 subjects.ids"],
    ),
    ("yaml-syntax", _edit("alpha: 0.05", "alpha: [0.05"), ["study.yaml:", "not valid YAML"]),
    ("version", _edit("version: 1", "version: 2"), ["study.yaml:1 version"]),
    ("pattern-without-subject", _edit("data/sub-{subject}.npz", "data/sub-01.npz"), ["study.yaml:6 subjects.path"]),
    (
        "path-leaves-folder",
        _edit("data/sub-{subject}.npz", "../data/sub-{subject}.npz"),
        ["study.yaml:6 subjects.path"],
    ),
    ("spec-not-a-mapping", _bytes(b"- one\n- two\n"), ["study.yaml:1"]),
    (
        "band-outside-grid",
        _edit("channels:\n", "analysis:\n  freq_hz: [30, 40]\nchannels:\n"),
        ["study.yaml:17 analysis.freq_hz"],
    ),
    (
        "duplicate-contrast",
        _edit("inference:", "  - name: high-vs-low\n    test: one-sample\n    conditions: [high]\ninference:"),
        ["contrasts[1].name: duplicate contrast name"],
    ),
]


def _files(folder: Path) -> dict[str, float]:
    return {str(p): p.stat().st_mtime for p in folder.rglob("*") if p.is_file()}


@pytest.fixture
def broken(tmp_path, request):
    name, apply, fragments = request.param
    write_tiny_study(tmp_path, n_subjects=6)
    apply(tmp_path)
    return tmp_path, fragments


def _no_snakemake(*args, **kwargs):
    raise AssertionError("Snakemake was started for a spec that is broken")


@pytest.mark.parametrize("broken", CASES, ids=[c[0] for c in CASES], indirect=True)
def test_check_names_each_mistake_in_one_line(broken, capsys, monkeypatch):
    folder, fragments = broken
    monkeypatch.setattr(famwise.cli, "run_snakemake", _no_snakemake)
    before = _files(folder)
    assert main(["check", str(folder / "study.yaml")]) == 2
    out, err = capsys.readouterr()
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("famwise: error: "), err
    assert "Traceback" not in out + err
    for fragment in fragments:
        assert fragment in lines[0], lines[0]
    assert _files(folder) == before


@pytest.mark.parametrize("broken", CASES, ids=[c[0] for c in CASES], indirect=True)
def test_run_stops_each_mistake_before_the_first_job(broken, capsys, monkeypatch):
    folder, _ = broken
    monkeypatch.setattr(famwise.cli, "run_snakemake", _no_snakemake)
    assert main(["run", str(folder / "study.yaml"), "--cores", "1"]) == 2
    assert not (folder / "results").exists()
    assert "Traceback" not in capsys.readouterr().err


def test_the_list_is_long_enough():
    assert len(CASES) >= 30
