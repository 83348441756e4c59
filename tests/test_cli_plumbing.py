"""Exit statuses, messages and help of the command line (in-process where Snakemake is not needed)."""

import os
import signal
import subprocess
import sys

import pytest

import famwise.cli
import famwise.demo
import famwise.launch
from famwise.check_reasons import changed_settings, describe_reasons
from famwise.cli import main

from conftest import write_tiny_study


@pytest.mark.parametrize("cores", ["0", "-3", "two"])
def test_cores_must_be_a_positive_whole_number(tiny_study, cores, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["run", str(tiny_study), "--cores", cores])
    assert stop.value.code == 2
    assert "argument --cores" in capsys.readouterr().err


def test_debug_is_accepted_after_the_subcommand(tmp_path, capsys):
    spec = write_tiny_study(tmp_path)
    spec.write_text(spec.read_text().replace("seed: 7", "sed: 7"))
    assert main(["check", str(spec), "--debug"]) == 2
    assert "Traceback" in capsys.readouterr().err


def test_help_lists_commands_in_workflow_order_and_explains_positionals(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    text = capsys.readouterr().out
    positions = [text.index(f"    {name}") for name in ("init", "check", "run", "calibrate", "demo", "bench")]
    assert positions == sorted(positions)
    for command, wanted in (
        ("run", "[-- SNAKEMAKE_ARGS ...]"),
        ("check", "spec        the study spec"),
        ("init", "data        a BIDS-EEG folder"),
        ("demo", "(default: famwise-demo)"),
    ):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        assert wanted in capsys.readouterr().out, command


class _FakeSnakemake:
    """A Snakemake process whose output stream is interrupted by Ctrl-C once."""

    def __init__(self, *args, **kwargs):
        self.returncode = None
        self.signals = []
        self.stdout = self

    def __iter__(self):
        if not self.signals:
            yield "rule decompose:\n"
            raise KeyboardInterrupt
        yield "Will exit after finishing currently running jobs.\n"

    def send_signal(self, number):
        self.signals.append(number)

    def wait(self):
        self.returncode = 1
        return 1


def test_interrupted_run_exits_130(tiny_study, monkeypatch, capsys):
    monkeypatch.setattr(famwise.launch.subprocess, "Popen", _FakeSnakemake)
    assert main(["run", str(tiny_study), "--cores", "1"]) == 130
    err = capsys.readouterr().err
    assert "famwise: interrupted" in err and "failed" not in err


def test_no_op_run_says_nothing_needed_to_run(tiny_study, monkeypatch, capsys):
    monkeypatch.setattr(
        famwise.cli,
        "run_snakemake",
        lambda plan, options, **kw: (
            0,
            ["Building DAG of jobs...", "Nothing to be done (all requested files are present and up to date)."],
        ),
    )
    assert main(["run", str(tiny_study), "--cores", "1"]) == 0
    assert "famwise: nothing needed to run: every result is up to date" in capsys.readouterr().out


def test_refused_snakemake_argument_shows_snakemake_message(tiny_study, monkeypatch, capsys):
    lines = ["usage: snakemake [-h] ...", "snakemake: error: unrecognized arguments: --bogus-flag"]
    monkeypatch.setattr(famwise.cli, "run_snakemake", lambda plan, options, **kw: (2, lines))
    assert main(["run", str(tiny_study), "--cores", "1", "--", "--bogus-flag"]) == 2
    assert "famwise: error: Snakemake: unrecognized arguments: --bogus-flag" in capsys.readouterr().err


@pytest.mark.workflow
def test_bogus_snakemake_argument_for_real(tiny_study):
    result = subprocess.run(
        [sys.executable, "-m", "famwise.cli", "run", str(tiny_study), "--cores", "1", "--", "--bogus-flag"],
        capture_output=True,
        text=True,
    )
    assert result.returncode == 2
    assert "unrecognized arguments: --bogus-flag" in result.stderr and "Traceback" not in result.stderr


def test_check_into_a_closed_pipe_has_no_traceback(tiny_study):
    process = subprocess.Popen(
        [sys.executable, "-m", "famwise.cli", "check", str(tiny_study)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )
    process.stdout.readline()
    process.stdout.close()
    err = process.stderr.read()
    assert process.wait() == 141
    assert "Traceback" not in err and "BrokenPipe" not in err


def test_check_leaves_nothing_behind(tiny_study):
    before = sorted(tiny_study.parent.rglob("*"))
    assert main(["check", str(tiny_study)]) == 0
    assert sorted(tiny_study.parent.rglob("*")) == before


def test_demo_says_whether_it_wrote_the_data(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(famwise.cli, "command_run", lambda args: 0)
    monkeypatch.setattr(famwise.demo, "write_demo", lambda folder: folder / "study.yaml")
    assert main(["demo", str(tmp_path)]) == 0
    assert "wrote the example study's data" in capsys.readouterr().out
    (tmp_path / "data").mkdir()
    (tmp_path / "data" / ".complete").write_text("")
    (tmp_path / "study.yaml").write_text("")
    assert main(["demo", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "found the example study's data in" in out and "wrote" not in out


def test_reasons_name_the_changed_setting(tmp_path):
    (tmp_path / "study.json").write_text(
        '{"inference": {"permutations": 1000, "alpha": 0.05}, "decomposition": {"cycles": 3}}'
    )
    changes = changed_settings(
        tmp_path, {"inference": {"permutations": 2000, "alpha": 0.05}, "decomposition": {"cycles": 3}}
    )
    assert changes == ["inference.permutations 1000 -> 2000"]
    reason = "Params have changed since last execution: " + "x" * 300
    assert describe_reasons("null_shard", {reason}, changes) == "settings changed: inference.permutations 1000 -> 2000"
    assert describe_reasons("decompose", {reason}, changes) == "settings changed"
    assert (
        describe_reasons(
            "report", {"Missing output files: report/index.html", "Input files updated by another job: a"}, []
        )
        == "an input is remade first; no result yet"
    )


@pytest.mark.workflow
def test_ctrl_c_during_a_real_run_exits_130(tiny_study):
    process = subprocess.Popen(
        [sys.executable, "-m", "famwise.cli", "run", str(tiny_study), "--cores", "1"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    for line in process.stdout:
        if line.strip().startswith("- decompose"):
            break
    os.killpg(process.pid, signal.SIGINT)  # what Ctrl-C does: SIGINT to famwise and Snakemake alike
    process.stdout.read()
    err = process.stderr.read()
    assert process.wait(timeout=120) == 130
    assert "famwise: interrupted" in err and "the run failed" not in err and "Traceback" not in err


def test_help_lists_the_commands_in_the_order_of_work(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    listed = [
        line.split()[0]
        for line in capsys.readouterr().out.splitlines()
        if line.startswith("    ") and not line.startswith("     ")
    ]
    assert listed[:4] == ["init", "check", "run", "calibrate"]
    assert listed.index("calibrate") < listed.index("demo") < listed.index("bench")
