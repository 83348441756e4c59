"""Launching Snakemake for the CLI's commands: the one place the workflow is started from.

Snakemake runs in a subprocess (so any Snakemake flag can be passed through);
Ctrl-C reaches it as SIGINT and we wait for it to clean up; a lock left by a
killed run is cleared when no live famwise run holds it.
"""

import os
import signal
import subprocess
import sys
from importlib import resources
from pathlib import Path

from famwise.errors import UserError


def workflow_entry() -> Path:
    """The packaged workflow entry (``rules/main.smk``)."""
    return Path(str(resources.files("famwise.rules") / "main.smk"))


def profile_options(profile: Path | None) -> list[str]:
    """Snakemake's ``--profile DIR`` options for a profile folder (e.g. ``configs/profiles/slurm``); none without one.

    Raises
    ------
    UserError
        The folder does not exist.
    """
    if profile is None:
        return []
    if not profile.is_dir():
        raise UserError(f"--profile {profile}: no such profile folder")
    return ["--profile", str(profile.resolve())]


def run_snakemake(plan, options: list[str], *, capture: bool, config: dict | None = None) -> tuple[int, list[str]]:
    """Run Snakemake in a subprocess; Ctrl-C reaches it as SIGINT and we wait for it.

    ``config`` adds workflow config values to ``spec`` (one ``--config`` flag:
    a second one would replace the first).
    """
    output = plan.loaded.output
    output.mkdir(parents=True, exist_ok=True)
    _clear_stale_lock(output)
    values = [f"{key}={value}" for key, value in {"spec": plan.loaded.path, **(config or {})}.items()]
    command = [
        sys.executable,
        "-m",
        "snakemake",
        "--snakefile",
        str(workflow_entry()),
        "--directory",
        str(output),
        "--rerun-incomplete",
        "--nocolor",
        *options,
        "--config",
        *values,
    ]
    pidfile = output / ".famwise-run.pid"
    pidfile.write_text(str(os.getpid()))
    lines: list[str] = []
    interrupted = False
    show = _Progress()
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, bufsize=1)
    try:
        while True:
            try:
                for line in process.stdout:
                    lines.append(line.rstrip("\n"))
                    if not capture:
                        show(line)
                process.wait()
                break
            except KeyboardInterrupt:
                interrupted = True
                process.send_signal(signal.SIGINT)
                print("famwise: stopping (waiting for Snakemake to clean up) ...", file=sys.stderr)
    finally:
        pidfile.unlink(missing_ok=True)
    if interrupted:
        raise KeyboardInterrupt  # Snakemake has cleaned up; the CLI reports "interrupted" with exit status 130
    return process.returncode, lines


class _Progress:
    """Turns Snakemake's output into short progress lines: each job as it starts, and the step count."""

    def __init__(self):
        self.pending = None

    def __call__(self, line: str) -> None:
        text = line.strip()
        if text.startswith(("rule ", "localrule ")) and text.endswith(":"):
            self._flush()
            self.pending = text.split()[1].rstrip(":")
        elif text.startswith("wildcards:") and self.pending:
            print(f"  - {self.pending} ({text[10:].strip()})", flush=True)
            self.pending = None
        elif "steps (" in text and text.endswith("done"):
            self._flush()
            print(f"    {text}", flush=True)
        elif text.startswith(("Error in rule", "MissingInputException", "WorkflowError", "Exiting because")):
            self._flush()
            print(f"    {text}", flush=True)

    def _flush(self) -> None:
        if self.pending and self.pending != "all":
            print(f"  - {self.pending}", flush=True)
        self.pending = None


def _clear_stale_lock(output: Path) -> None:
    """Remove Snakemake's lock when no live famwise run holds it (e.g. after a killed run)."""
    locks = output / ".snakemake" / "locks"
    if not locks.is_dir() or not any(locks.iterdir()):
        return
    pidfile = output / ".famwise-run.pid"
    if pidfile.exists():
        try:
            pid = int(pidfile.read_text())
            os.kill(pid, 0)
            if pid != os.getpid():
                raise UserError(f"another famwise run (process {pid}) is using {output}; wait for it or stop it")
        except (ValueError, ProcessLookupError, PermissionError):
            pass
    for lock in locks.iterdir():
        lock.unlink()
    print(f"famwise: cleared a stale lock left in {output} by an interrupted run", file=sys.stderr)


def job_error(plan, since: float) -> str | None:
    """The first ``famwise: error:`` line written by a job since ``since``."""
    logs = plan.loaded.output / "logs"
    found = []
    for log in logs.rglob("*.log") if logs.is_dir() else []:
        if log.stat().st_mtime < since - 1:
            continue
        for line in log.read_text(errors="replace").splitlines():
            if line.startswith("famwise: error: "):
                found.append((log.stat().st_mtime, line[len("famwise: error: ") :]))
                break
    return min(found)[1] if found else None
