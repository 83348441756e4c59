"""famwise calibrate through Snakemake: shards as jobs, resume, the command's output, the report's section."""

import argparse
import contextlib
import io

import pytest

import famwise.cli
from famwise import calibrate_command
from famwise.calibrate.table import read_table
from famwise.errors import UserError

from conftest import write_tiny_study

pytestmark = pytest.mark.workflow

CORRECTIONS = """\
- method: bonferroni
- method: max-stat
"""
OPTIONS = ["--datasets", "6", "--shards", "3", "--permutations", "15", "--cores", "2"]


def _calibrate(spec, options=OPTIONS):
    """Run the calibrate handler through its own parser; returns (exit code, stdout, stderr)."""
    parser = argparse.ArgumentParser()
    calibrate_command.add_parser(parser.add_subparsers(dest="command"))
    args = parser.parse_args(["calibrate", str(spec), *options])
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = args.handler(args)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def calibrated(tmp_path_factory):
    root = tmp_path_factory.mktemp("calibrate")
    spec = write_tiny_study(root / "study", n_subjects=4, permutations=31, corrections=CORRECTIONS)
    yield spec, _calibrate(spec), lambda: _calibrate(spec)


def test_calibrate_writes_table_figure_and_prints_it(calibrated):
    spec, (code, out, err), _ = calibrated
    assert code == 0, out + err
    folder = spec.parent / "results" / "calibration"
    rows = read_table(folder / "high-vs-low.tsv")
    assert [r["correction"] for r in rows] == ["uncorrected", "bonferroni", "max-stat"]
    assert all(r["datasets"] == 6 for r in rows)
    assert rows[2]["permutations"] == 15  # 2^4 = 16 sign flips fit in 1 + 15 rows: all of them, identity aside
    assert (folder / "high-vs-low.png").is_file() and (folder / "high-vs-low.json").is_file()
    assert sorted(p.name for p in (folder / "high-vs-low").iterdir()) == ["shard-0.npz", "shard-1.npz", "shard-2.npz"]
    assert "(reduced from the study's 31)" in out
    assert "uncorrected" in out and "max-stat" in out and "[" in out
    assert "calibration: 0/6 null datasets done" in err and "calibration: 6/6 null datasets done" in err
    logs = spec.parent / "results" / "logs"
    assert sorted(p.name for p in (logs / "calibrate_shard").glob("*.benchmark.tsv")) == [
        f"high-vs-low-{k}.benchmark.tsv" for k in range(3)
    ]
    assert (logs / "calibrate_table" / "high-vs-low.benchmark.tsv").is_file()


def test_interrupted_run_recomputes_only_the_missing_shard(calibrated):
    spec, _, again = calibrated
    folder = spec.parent / "results" / "calibration" / "high-vs-low"
    before = {p.name: p.stat().st_mtime_ns for p in folder.iterdir()}
    table = folder.parent / "high-vs-low.tsv"
    table_before = table.read_text()
    # An interrupted run: one shard never finished, so neither did the table.
    (folder / "shard-1.npz").unlink()
    table.unlink()
    code, out, err = again()
    assert code == 0, out + err
    assert out.count("calibrate_shard") == 1 and "shard=1" in out
    after = {p.name: p.stat().st_mtime_ns for p in folder.iterdir()}
    assert after["shard-0.npz"] == before["shard-0.npz"] and after["shard-2.npz"] == before["shard-2.npz"]
    assert after["shard-1.npz"] != before["shard-1.npz"]
    assert table.read_text() == table_before  # same datasets, same outcome
    assert "calibration: 4/6 null datasets done" in err and "calibration: 6/6 null datasets done" in err


def test_bad_option_is_a_user_error_before_snakemake(calibrated):
    spec, _, _ = calibrated
    with pytest.raises(UserError, match=r"--shards must be between 1 and the number of datasets \(3\), got 5"):
        _calibrate(spec, ["--datasets", "3", "--shards", "5"])


def test_famwise_calibrate_command_is_wired(calibrated, capsys):
    spec, _, _ = calibrated
    code = famwise.cli.main(["calibrate", str(spec), *OPTIONS])
    out = capsys.readouterr().out
    assert code == 0
    assert "high-vs-low" in out and "bonferroni" in out


def test_report_flags_a_calibration_that_no_longer_matches(calibrated):
    spec, _, _ = calibrated
    report = spec.parent / "results" / "report" / "index.html"
    stale = "computed before the latest change"
    assert famwise.cli.main(["run", str(spec), "--cores", "2"]) == 0
    text = report.read_text()
    assert "Error-rate calibration" in text and stale not in text
    spec.write_text(spec.read_text().replace("alpha: 0.05", "alpha: 0.01"))
    assert famwise.cli.main(["run", str(spec), "--cores", "2"]) == 0
    assert stale in report.read_text()
