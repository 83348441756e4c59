"""The ``famwise`` command: init, check, run, calibrate, power, compare, pack, demo, bench.

Exit status: 0 on success, 2 on a user error (one clear message, no
traceback; ``--debug`` shows it), 130 when interrupted (Ctrl-C), 141 when
the output pipe closed early (``famwise check spec | head``), 1 on an
internal error.
"""

import argparse
import os
import re
import shutil
import sys
import time
import traceback
from pathlib import Path

from famwise import __version__
from famwise.errors import UserError
from famwise.launch import job_error, profile_options, run_snakemake


def main(argv: list[str] | None = None) -> int:
    parser = _parser()
    args, extra = parser.parse_known_args(argv)
    if extra and args.command != "run":
        parser.error(f"unrecognized arguments: {' '.join(extra)}")
    args.snakemake_args = [a for a in extra if a != "--"]
    try:
        code = args.handler(args) or 0
        sys.stdout.flush()  # a closed pipe shows here, not in the interpreter's exit
        return code
    except BrokenPipeError:
        # the reader of our output went away (`| head`): stop quietly, as a killed pipe writer would
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 141
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


def _cores(text: str) -> int:
    """A --cores value: a whole number of at least 1."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number of cores, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"needs at least 1 core, got {value}")
    return value


SPEC_HELP = "the study spec (YAML); relative paths in it start at its folder"
DEMO_FOLDER = Path("famwise-demo")


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="famwise", description="Corrected group statistics for EEG time-frequency data from one study spec."
    )
    parser.add_argument("--version", action="version", version=f"famwise {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks of user errors")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    init = commands.add_parser(
        "init",
        help="write a commented starter spec from the data found in a folder",
        description="Write a commented starter spec from the data found in a folder.",
    )
    init.add_argument("data", type=Path, help="a BIDS-EEG folder, or a folder of epochs files sub-<id>.npz")
    init.add_argument("--out", type=Path, help="spec file to write (default: study.yaml beside the data folder)")
    init.set_defaults(handler=command_init)

    check = commands.add_parser(
        "check",
        help="validate a spec and its inputs, and show what would run and why",
        description="Validate a spec and its inputs (without changing any file) and show what would run and why.",
    )
    check.add_argument("spec", type=Path, help=SPEC_HELP)
    check.set_defaults(handler=command_check)

    run = commands.add_parser(
        "run",
        help="run a study (only what changed reruns); extra arguments after -- go to Snakemake",
        usage="famwise run [-h] [--cores N] [--profile DIR] [--debug] spec [-- SNAKEMAKE_ARGS ...]",
        description="Run a study; only what changed since the last run reruns. Arguments after -- go to Snakemake.",
    )
    run.add_argument("spec", type=Path, help=SPEC_HELP)
    run.add_argument(
        "--cores", type=_cores, default=os.cpu_count() or 1, metavar="N", help="cores to use (default: all)"
    )
    run.add_argument(
        "--profile", type=Path, metavar="DIR", help="Snakemake profile folder, e.g. configs/profiles/slurm"
    )
    run.set_defaults(handler=command_run)

    from famwise.calibrate_command import add_parser as add_calibrate_parser

    add_calibrate_parser(commands)

    from famwise.power_command import add_parser as add_power_parser

    add_power_parser(commands)

    from famwise.handoff.commands import add_parsers as add_handoff_parsers

    add_handoff_parsers(commands)

    demo = commands.add_parser(
        "demo",
        help="write the example study's data and run it",
        description="Write the example study (spec and invented BIDS-EEG data) into a folder and run it; "
        "data already written there are reused.",
    )
    demo.add_argument(
        "folder", type=Path, nargs="?", default=DEMO_FOLDER, help=f"where to write the study (default: {DEMO_FOLDER})"
    )
    demo.add_argument(
        "--cores", type=_cores, default=os.cpu_count() or 1, metavar="N", help="cores to use (default: all)"
    )
    demo.set_defaults(handler=command_demo)

    bench = commands.add_parser(
        "bench",
        help="time famwise's kernels against the plain, slow implementations of famwise.naive",
        description="Time famwise's kernels against the plain, slow implementations of famwise.naive.",
    )
    bench.add_argument("--quick", action="store_true", help="smaller sizes (under 2 minutes)")
    bench.add_argument("--json", type=Path, help="also write the table as JSON")
    bench.set_defaults(handler=command_bench)

    for command in commands.choices.values():  # --debug also after the subcommand
        command.add_argument(
            "--debug", action="store_true", default=argparse.SUPPRESS, help="show tracebacks of user errors"
        )
    return parser


# ---- check ----------------------------------------------------------------------


def command_check(args) -> int:
    from famwise.handoff.commands import verify_handoff
    from famwise.job_benchmarks import describe_stage_costs
    from famwise.plan import Plan
    from famwise.preflight import preflight
    from famwise.preflight.spec_checks import attainability_warnings
    from famwise.summary import describe_plan, input_warnings

    verify_handoff(args.spec)
    plan = Plan.from_spec(args.spec)
    found = preflight(plan)
    print(describe_plan(plan))
    _warn(input_warnings(plan) + found + attainability_warnings(plan))
    from famwise.check_reasons import changed_settings, describe_reasons

    for path in plan.loaded.outside_paths():
        print(
            f"famwise: note: {path} lies outside the spec's folder: the spec is tied to this machine's file system",
            file=sys.stderr,
        )
    print()
    print("What would run and why:")
    jobs = planned_jobs(plan)
    if not jobs:
        print("  nothing: every result is up to date")
    changes = changed_settings(plan.loaded.output, plan.study.model_dump(mode="json"))
    for rule, (count, reasons) in jobs.items():
        print(f"  {count:4d} x {rule:<17} {describe_reasons(rule, reasons, changes)}")
    costs = describe_stage_costs(plan.loaded.output / "logs")
    if costs:
        print()
        print(costs)
    return 0


def _warn(messages: list[str]) -> None:
    for message in messages:
        print(f"famwise: warning: {message}", file=sys.stderr)


def planned_jobs(plan) -> dict[str, tuple[int, set[str]]]:
    """Jobs Snakemake would run now: rule -> (count, reasons), from a dry run that leaves no file behind."""
    output = plan.loaded.output
    existed = output.exists()
    before = set(output.rglob("*")) if existed else set()
    try:
        code, lines = run_snakemake(plan, ["--dry-run", "--cores", "1"], capture=True)
    finally:
        if not existed:
            shutil.rmtree(output, ignore_errors=True)
        else:  # deepest first, so that a new folder is empty when its turn comes
            for path in sorted(set(output.rglob("*")) - before, key=lambda p: len(p.parts), reverse=True):
                if path.is_dir():
                    shutil.rmtree(path, ignore_errors=True)
                else:
                    path.unlink(missing_ok=True)
    if code != 0:
        raise UserError(job_error(plan, 0.0) or "Snakemake could not plan the run:\n" + "\n".join(lines[-15:]))
    jobs: dict[str, tuple[int, set[str]]] = {}
    rule = None
    for line in lines:
        text = line.strip()
        for prefix in ("rule ", "localrule "):
            if text.startswith(prefix) and text.endswith(":"):
                rule = text[len(prefix) : -1]
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
    from famwise.preflight import preflight
    from famwise.preflight.spec_checks import attainability_warnings

    verify_handoff(args.spec)
    plan = Plan.from_spec(args.spec)
    upfront = preflight(plan) + attainability_warnings(plan)
    _warn(upfront)
    options = ["--cores", str(args.cores), *profile_options(args.profile)]
    config = {}
    if not args.profile or args.profile.resolve().name == "local":  # cluster jobs keep one thread each
        config["null_threads"] = max(1, args.cores // plan.study.inference.shards)
    started = time.time()
    print(
        f"famwise {__version__}: {plan.study.name}: {len(plan.subjects)} subjects, "
        f"{len(plan.study.contrasts)} contrast(s), {len(plan.study.inference.corrections)} correction(s) -> {plan.loaded.output}"
    )
    code, lines = run_snakemake(plan, options + args.snakemake_args, capture=False, config=config)
    if code == 0:
        from famwise import stage_warnings

        _warn(
            [
                line
                for line in stage_warnings.gather(plan.loaded.output, list(plan.subjects))
                if stage_warnings.message_of(line) not in upfront
            ]
        )
        if any("Nothing to be done" in line for line in lines):
            print(
                f"famwise: nothing needed to run: every result is up to date; report: {plan.loaded.output / 'report' / 'index.html'}"
            )
        else:
            print(
                f"famwise: done in {time.time() - started:.1f} s; report: {plan.loaded.output / 'report' / 'index.html'}"
            )
        return 0
    message = job_error(plan, started)
    if message:
        raise UserError(message)
    refused = [line.split(" error: ", 1)[1] for line in lines if re.match(r"[\w.-]+: error: ", line)]
    if refused:
        raise UserError(f"Snakemake: {refused[-1]} (arguments after --: {' '.join(args.snakemake_args)})")
    tail = [line for line in lines if line.strip()][-10:]
    print("\n".join(tail), file=sys.stderr)
    print(
        f"famwise: the run failed; Snakemake's last lines are above, the jobs' logs under {plan.loaded.output / 'logs'}",
        file=sys.stderr,
    )
    return 1


# ---- demo / init --------------------------------------------------------------------


def command_demo(args) -> int:
    from famwise.demo import data_complete, write_demo

    found = data_complete(args.folder)
    spec = write_demo(args.folder)
    done = "found the example study's data in" if found else "wrote the example study's data to"
    print(f"famwise: {done} {args.folder}; running {spec}")
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
