"""The ``famwise calibrate`` subcommand: run the calibration rules and print the tables.

``famwise calibrate SPEC [--datasets N] [--permutations M] [--shards K] [--cores N] [--profile DIR]``
asks Snakemake for ``calibration/<contrast>.tsv`` of every contrast (building
the contrast data first when needed). Finished shards are kept, so a run that
was interrupted resumes where it stopped. While it runs, the number of null
datasets done is printed on stderr. When the study's report exists, it is
rebuilt afterwards so that it shows the calibration (the report rule then
declares the calibration files as inputs, so they trigger the rerun).
"""

import json
import math
import os
import re
import sys
import threading
import time
from pathlib import Path

from famwise import layout
from famwise.errors import UserError
from famwise.launch import job_error, profile_options, run_snakemake
from famwise.settings_codec import to_json

_PROGRESS = re.compile(r"calibration (\S+): shard (\d+): (\d+)/(\d+) datasets")


def add_parser(commands) -> None:
    """Add ``calibrate`` to the CLI's subcommands (the ``add_subparsers`` object)."""
    parser = commands.add_parser(
        "calibrate", help="check each correction's false-positive rate on null datasets made from the study's own maps"
    )
    parser.add_argument("spec", type=Path, help="the study spec (YAML)")
    parser.add_argument("--datasets", type=int, default=100, help="null datasets per contrast (default 100)")
    parser.add_argument(
        "--permutations", type=int, help="permutations per null dataset (default: the study's inference.permutations)"
    )
    parser.add_argument(
        "--shards",
        type=int,
        help="pieces the datasets are computed in, one job and one file each (default: min(10, datasets))",
    )
    parser.add_argument("--cores", type=int, default=os.cpu_count() or 1, help="cores to use (default: all)")
    parser.add_argument(
        "--profile", type=Path, metavar="DIR", help="Snakemake profile folder, e.g. configs/profiles/slurm"
    )
    parser.set_defaults(handler=command_calibrate)


def command_calibrate(args) -> int:
    """Handler of ``famwise calibrate``."""
    from famwise.calibrate import calibration_settings
    from famwise.calibrate.table import read_table
    from famwise.plan import Plan

    plan = Plan.from_spec(args.spec)
    from famwise.preflight import preflight

    preflight(plan)  # the mistakes `run` catches before its first job
    options = ["--cores", str(args.cores), *profile_options(args.profile)]
    shards = args.shards if args.shards is not None else min(10, max(args.datasets, 1))
    contrasts = [c.name for c in plan.study.contrasts]
    settings = {  # checks the options here, before Snakemake sees them
        name: to_json(
            calibration_settings(plan, name, datasets=args.datasets, permutations=args.permutations, shards=shards)
        )
        for name in contrasts
    }
    config = {"calibrate_datasets": args.datasets, "calibrate_shards": shards}
    if args.permutations is not None:
        config["calibrate_permutations"] = args.permutations
    targets = [layout.calibration_files(name)["table"] for name in contrasts]
    used = args.permutations or plan.study.inference.permutations
    print(
        f"famwise: calibrating {len(contrasts)} contrast(s) with {args.datasets} null datasets each, "
        f"{used} permutations per dataset"
        + (
            f" (reduced from the study's {plan.study.inference.permutations})"
            if used < plan.study.inference.permutations
            else ""
        )
    )
    started = time.time()
    watcher = ProgressWatcher(
        plan.loaded.output / "logs" / "calibrate_shard",
        total=args.datasets * len(contrasts),
        kept=_kept_datasets(plan.loaded.output / "calibration", settings),
        since=started,
    )
    watcher.start()
    try:
        code, _ = run_snakemake(plan, [*options, *targets], capture=False, config=config)
    finally:
        watcher.stop()
    if code != 0:
        message = job_error(plan, started)
        if message:
            raise UserError(message)
        print(f"famwise: the calibration failed; see the logs under {plan.loaded.output / 'logs'}", file=sys.stderr)
        return 1
    for name in contrasts:
        path = plan.loaded.output / "calibration" / f"{name}.tsv"
        print(f"\n{name} ({path}):")
        rows = read_table(path)
        print(format_rows(rows))
        for message in wide_interval_warnings(rows):
            print(f"famwise: warning: contrast {name}: {message}", file=sys.stderr)
    report = plan.loaded.output / "report" / "index.html"
    if report.is_file():
        print("\nfamwise: updating the report with the calibration")
        code, _ = run_snakemake(plan, [*options, layout.REPORT_PAGE], capture=False, config=config)
        if code != 0:
            raise UserError(
                job_error(plan, started)
                or f"the report could not be updated; see the logs under {plan.loaded.output / 'logs'}"
            )
    else:
        print(f"\nfamwise: `famwise run {args.spec}` builds the report, which will include the calibration")
    print(f"famwise: done in {time.time() - started:.1f} s")
    return 0


def wide_interval_warnings(rows: list[dict]) -> list[str]:
    """One line per correction whose 95% FWER interval is wider than twice its nominal level.

    Such an interval (e.g. [0.07, 0.65] from 10 datasets at alpha 0.05) supports
    no conclusion about the correction. The suggested number of datasets gives
    an interval about as wide as the nominal level when the rate equals it
    (normal approximation, common practice).
    """
    messages = []
    for row in rows:
        nominal = float(row["nominal"])
        low, high = float(row["fwer_ci_low"]), float(row["fwer_ci_high"])
        if high - low > 2 * nominal:
            needed = math.ceil(4 * 1.96**2 * (1 - nominal) / nominal)
            messages.append(
                f"correction {row['correction']}: the 95% interval [{low:.3f}, {high:.3f}] of its error rate is wider than "
                f"twice the nominal {nominal:g}, too wide to support a conclusion; use about --datasets {needed} (now {int(row['datasets'])})"
            )
    return messages


def format_rows(rows: list[dict]) -> str:
    """The calibration table as aligned text."""
    lines = [
        f"  {'correction':<16} {'FWER':>6}  {'95% interval':<16} {'nominal':>7}  {'detections':>10}  {'permutations':>12}"
    ]
    for row in rows:
        interval = f"[{row['fwer_ci_low']:.3f}, {row['fwer_ci_high']:.3f}]"
        permutations = row["permutations"] if row["permutations"] == "n/a" else str(int(row["permutations"]))
        detections = f"{int(row['detections'])}/{int(row['datasets'])}"
        lines.append(
            f"  {row['correction']:<16} {row['fwer']:>6.3f}  {interval:<16} {row['nominal']:>7g}  {detections:>10}  {permutations:>12}"
        )
    return "\n".join(lines)


def _kept_datasets(folder: Path, settings: dict[str, str]) -> int:
    """Datasets in shard files of earlier runs that this run keeps (same settings)."""
    import numpy as np

    kept = 0
    for name, text in settings.items():
        wanted = json.loads(text)
        for path in (folder / name).glob("shard-*.npz"):
            try:
                with np.load(path, allow_pickle=False) as archive:
                    if json.loads(str(archive["settings"])) == wanted:
                        kept += int(archive["datasets"].size)
            except (OSError, ValueError, KeyError):
                continue
    return kept


class ProgressWatcher:
    """Prints 'null datasets done / total' on stderr from the shard jobs' logs, every few seconds."""

    def __init__(
        self,
        logs: Path,
        *,
        total: int,
        kept: int,
        since: float,
        every: float = 3.0,
        label: str = "calibration",
        unit: str = "null datasets",
        pattern: re.Pattern = _PROGRESS,
    ):
        """``pattern`` finds a job's progress lines; its second-to-last group is the count done."""
        self._logs, self._total, self._kept, self._since, self._every = logs, total, kept, since, every
        self._label, self._unit, self._pattern = label, unit, pattern
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._last = -1

    def start(self) -> None:
        self._report()  # the starting count, even when the run ends before the first tick
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        self._thread.join()
        self._report()

    def _run(self) -> None:
        while not self._stop.wait(self._every):
            self._report()

    def _report(self) -> None:
        done = self._kept + self.done()
        if done != self._last:
            self._last = done
            print(f"    {self._label}: {done}/{self._total} {self._unit} done", file=sys.stderr, flush=True)

    def done(self) -> int:
        """Datasets finished by shard jobs of this run (their logs' last progress lines)."""
        done = 0
        for log in self._logs.glob("*.log") if self._logs.is_dir() else []:
            try:
                if log.stat().st_mtime < self._since - 1:
                    continue
                found = self._pattern.findall(log.read_text(errors="replace"))
            except OSError:
                continue
            if found:
                done += int(found[-1][-2])
        return done
