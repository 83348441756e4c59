"""The ``famwise`` command: check, run, demo, init, bench, calibrate, power, compare, pack.

Exit status: 0 on success, 2 on a user error (one clear message, no
traceback; ``--debug`` shows it), 1 on an internal error.
"""

import argparse
import os
import signal
import subprocess
import sys
import time
import traceback
from importlib import resources
from pathlib import Path

from famwise import __version__
from famwise.errors import UserError


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    args, extra = parser.parse_known_args(argv)
    if extra and args.command != "run":
        parser.error(f"unrecognized arguments: {' '.join(extra)}")
    args.snakemake_args = [a for a in extra if a != "--"]
    try:
        return args.handler(args) or 0
    except UserError as error:
        if args.debug:
            traceback.print_exc()
        print(f"famwise: error: {error}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("famwise: interrupted", file=sys.stderr)
        return 130
    except Exception:
        traceback.print_exc()
        print("famwise: internal error (the traceback above helps us fix it)", file=sys.stderr)
        return 1


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="famwise", description="Corrected group statistics for EEG time-frequency data from one study spec.")
    parser.add_argument("--version", action="version", version=f"famwise {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of user errors")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    check = commands.add_parser("check", help="validate a spec and show what would run and why")
    check.add_argument("spec", type=Path)
    check.set_defaults(handler=command_check)

    run = commands.add_parser("run", help="run a study (only what changed reruns); extra arguments after -- go to Snakemake")
    run.add_argument("spec", type=Path)
    run.add_argument("--cores", type=int, default=os.cpu_count() or 1, help="cores to use (default: all)")
    run.add_argument("--profile", type=Path, help="Snakemake profile folder, e.g. configs/profiles/slurm")
    run.set_defaults(handler=command_run)

    demo = commands.add_parser("demo", help="write the example study's data and run it")
    demo.add_argument("folder", type=Path, nargs="?", default=Path("famwise-demo"))
    demo.add_argument("--cores", type=int, default=os.cpu_count() or 1)
    demo.set_defaults(handler=command_demo)

    init = commands.add_parser("init", help="write a commented starter spec from the data found in a folder")
    init.add_argument("data", type=Path)
    init.add_argument("--out", type=Path, help="spec file to write (default: study.yaml beside the data folder)")
    init.set_defaults(handler=command_init)

    bench = commands.add_parser("bench", help="time famwise's kernels against the naive reference implementations")
    bench.add_argument("--quick", action="store_true", help="smaller sizes (under 2 minutes)")
    bench.add_argument("--json", type=Path, help="also write the table as JSON")
    bench.set_defaults(handler=command_bench)

    from famwise.calibrate_command import add_parser as add_calibrate_parser

    add_calibrate_parser(commands)

    from famwise.power_command import add_parser as add_power_parser

    add_power_parser(commands)

    from famwise.handoff.commands import add_parsers as add_handoff_parsers

    add_handoff_parsers(commands)
    return parser


# ---- check ----------------------------------------------------------------------


def command_check(args) -> int:
    from famwise.job_benchmarks import describe_stage_costs
    from famwise.handoff.commands import verify_handoff
    from famwise.plan import Plan
    from famwise.summary import describe_plan, input_warnings

    verify_handoff(args.spec)
    plan = Plan.from_spec(args.spec)
    print(describe_plan(plan))
    _warn(input_warnings(plan) + plan.attainability_warnings())
    print()
    print("What would run and why:")
    jobs = planned_jobs(plan)
    if not jobs:
        print("  nothing: every result is up to date")
    for rule, (count, reasons) in jobs.items():
        print(f"  {count:4d} x {rule:<17} {'; '.join(sorted(reasons))[:150]}")
    costs = describe_stage_costs(plan.loaded.output / "logs")
    if costs:
        print()
        print(costs)
    return 0


def _warn(messages: list[str]) -> None:
    for message in messages:
        print(f"famwise: warning: {message}", file=sys.stderr)


def planned_jobs(plan) -> dict[str, tuple[int, set[str]]]:
    """Jobs Snakemake would run now: rule -> (count, reasons), from a dry run."""
    code, lines = _snakemake(plan, ["--dry-run", "--cores", "1"], capture=True)
    if code != 0:
        raise UserError(_job_error(plan, 0.0) or "Snakemake could not plan the run:\n" + "\n".join(lines[-15:]))
    jobs: dict[str, tuple[int, set[str]]] = {}
    rule = None
    for line in lines:
        text = line.strip()
        for prefix in ("rule ", "localrule "):
            if text.startswith(prefix) and text.endswith(":"):
                rule = text[len(prefix):-1]
                count, reasons = jobs.get(rule, (0, set()))
                jobs[rule] = (count + 1, reasons)
        if text.startswith("reason:") and rule:
            jobs[rule][1].add(text[7:].strip().split(";")[0])
    jobs.pop("all", None)
    return jobs


# ---- run --------------------------------------------------------------------------


def command_run(args) -> int:
    from famwise.handoff.commands import verify_handoff
    from famwise.plan import Plan

    verify_handoff(args.spec)
    plan = Plan.from_spec(args.spec)
    _warn(plan.attainability_warnings())
    options = ["--cores", str(args.cores)]
    if args.profile:
        if not args.profile.is_dir():
            raise UserError(f"--profile {args.profile}: no such profile folder")
        options += ["--profile", str(args.profile.resolve())]
    config = {}
    if not args.profile or args.profile.resolve().name == "local":  # cluster jobs keep one thread each
        config["null_threads"] = max(1, args.cores // plan.study.inference.shards)
    started = time.time()
    print(f"famwise {__version__}: {plan.study.name}: {len(plan.subjects)} subjects, "
          f"{len(plan.study.contrasts)} contrast(s), {len(plan.study.inference.corrections)} correction(s) -> {plan.loaded.output}")
    code, _ = _snakemake(plan, options + args.snakemake_args, capture=False, config=config)
    if code == 0:
        print(f"famwise: done in {time.time() - started:.1f} s; report: {plan.loaded.output / 'report' / 'index.html'}")
        return 0
    message = _job_error(plan, started)
    if message:
        raise UserError(message)
    print(f"famwise: the run failed; see the logs under {plan.loaded.output / 'logs'}", file=sys.stderr)
    return 1


def workflow_entry() -> Path:
    """The packaged workflow entry (``rules/main.smk``)."""
    return Path(str(resources.files("famwise.rules") / "main.smk"))


def _snakemake(plan, options: list[str], *, capture: bool, config: dict | None = None) -> tuple[int, list[str]]:
    """Run Snakemake in a subprocess; Ctrl-C reaches it as SIGINT and we wait for it.

    ``config`` adds workflow config values to ``spec`` (one ``--config`` flag:
    a second one would replace the first).
    """
    output = plan.loaded.output
    output.mkdir(parents=True, exist_ok=True)
    _clear_stale_lock(output)
    values = [f"{key}={value}" for key, value in {"spec": plan.loaded.path, **(config or {})}.items()]
    command = [
        sys.executable, "-m", "snakemake", "--snakefile", str(workflow_entry()), "--directory", str(output),
        "--rerun-incomplete", "--nocolor", *options, "--config", *values,
    ]
    pidfile = output / ".famwise-run.pid"
    pidfile.write_text(str(os.getpid()))
    lines: list[str] = []
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
                process.send_signal(signal.SIGINT)
                print("famwise: stopping (waiting for Snakemake to clean up) ...", file=sys.stderr)
    finally:
        pidfile.unlink(missing_ok=True)
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


def _job_error(plan, since: float) -> str | None:
    """The first ``famwise: error:`` line written by a job since ``since``."""
    logs = plan.loaded.output / "logs"
    found = []
    for log in logs.rglob("*.log") if logs.is_dir() else []:
        if log.stat().st_mtime < since - 1:
            continue
        for line in log.read_text(errors="replace").splitlines():
            if line.startswith("famwise: error: "):
                found.append((log.stat().st_mtime, line[len("famwise: error: "):]))
                break
    return min(found)[1] if found else None


# ---- demo / init --------------------------------------------------------------------


def command_demo(args) -> int:
    from famwise.demo import write_demo

    spec = write_demo(args.folder)
    print(f"famwise: wrote the example study's data to {args.folder}; running {spec}")
    run_args = argparse.Namespace(spec=spec, cores=args.cores, profile=None, snakemake_args=[], debug=args.debug)
    return command_run(run_args)


def command_init(args) -> int:
    from famwise.starter import write_starter_spec

    out = args.out or args.data.resolve().parent / "study.yaml"
    write_starter_spec(args.data, out)
    print(f"famwise: wrote {out}; edit it, then: famwise check {out}")
    return 0


# ---- bench ---------------------------------------------------------------------------


def command_bench(args) -> int:
    from famwise.benchmarks.run import run_benchmarks

    return run_benchmarks(quick=args.quick, json_path=args.json)


if __name__ == "__main__":
    sys.exit(main())
