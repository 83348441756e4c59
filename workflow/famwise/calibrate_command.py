"""The ``famwise calibrate`` subcommand: run the calibration rules and print the tables.

``famwise calibrate SPEC [--datasets N] [--permutations M] [--chunks K] [--cores N]``
asks Snakemake for ``calibration/<contrast>.tsv`` of every contrast (building
the contrast data first when needed). Finished chunks are kept, so a run that
was interrupted resumes where it stopped. While it runs, the number of null
datasets done is printed on stderr. When the study's report exists, it is
rebuilt afterwards so that it shows the calibration.
"""

import json
import os
import re
import sys
import threading
import time
from pathlib import Path

from famwise.errors import UserError

_PROGRESS = re.compile(r"calibration (\S+): chunk (\d+): (\d+)/(\d+) datasets")


def add_parser(commands) -> None:
    """Add ``calibrate`` to the CLI's subcommands (the ``add_subparsers`` object)."""
    parser = commands.add_parser("calibrate", help="check each correction's false-positive rate on null datasets made from the study's own maps")
    parser.add_argument("spec", type=Path)
    parser.add_argument("--datasets", type=int, default=100, help="null datasets per contrast (default 100)")
    parser.add_argument("--permutations", type=int, help="permutations per null dataset (default: the study's inference.permutations)")
    parser.add_argument("--chunks", type=int, help="pieces the datasets are computed in, one job and one file each (default: min(10, datasets))")
    parser.add_argument("--cores", type=int, default=os.cpu_count() or 1, help="cores to use (default: all)")
    parser.set_defaults(handler=command_calibrate)


def command_calibrate(args) -> int:
    """Handler of ``famwise calibrate``."""
    from famwise.calibrate import calibration_settings
    from famwise.calibrate.table import read_table
    from famwise.cli import _job_error, _snakemake
    from famwise.plan import Plan

    plan = Plan.from_spec(args.spec)
    chunks = args.chunks if args.chunks is not None else min(10, max(args.datasets, 1))
    contrasts = [c.name for c in plan.study.contrasts]
    settings = {  # checks the options here, before Snakemake sees them
        name: calibration_settings(plan, name, datasets=args.datasets, permutations=args.permutations, chunks=chunks)
        for name in contrasts
    }
    config = {"calibrate_datasets": args.datasets, "calibrate_chunks": chunks}
    if args.permutations is not None:
        config["calibrate_permutations"] = args.permutations
    targets = [f"calibration/{name}.tsv" for name in contrasts]
    used = args.permutations or plan.study.inference.permutations
    print(f"famwise: calibrating {len(contrasts)} contrast(s) with {args.datasets} null datasets each, "
          f"{used} permutations per dataset"
          + (f" (reduced from the study's {plan.study.inference.permutations})" if used < plan.study.inference.permutations else ""))
    started = time.time()
    watcher = _ProgressWatcher(plan.loaded.output / "logs" / "calibrate_chunk", total=args.datasets * len(contrasts),
                               kept=_kept_datasets(plan.loaded.output / "calibration", settings), since=started)
    watcher.start()
    try:
        code, _ = _snakemake(plan, ["--cores", str(args.cores), *targets], capture=False, config=config)
    finally:
        watcher.stop()
    if code != 0:
        message = _job_error(plan, started)
        if message:
            raise UserError(message)
        print(f"famwise: the calibration failed; see the logs under {plan.loaded.output / 'logs'}", file=sys.stderr)
        return 1
    for name in contrasts:
        path = plan.loaded.output / "calibration" / f"{name}.tsv"
        print(f"\n{name} ({path}):")
        print(format_rows(read_table(path)))
    report = plan.loaded.output / "report" / "index.html"
    if report.is_file():
        print("\nfamwise: updating the report with the calibration")
        code, _ = _snakemake(plan, ["--cores", str(args.cores), "report/index.html", "--forcerun", "report"], capture=False)
        if code != 0:
            raise UserError(_job_error(plan, started) or f"the report could not be updated; see the logs under {plan.loaded.output / 'logs'}")
    else:
        print(f"\nfamwise: `famwise run {args.spec}` builds the report, which will include the calibration")
    print(f"famwise: done in {time.time() - started:.1f} s")
    return 0


def format_rows(rows: list[dict]) -> str:
    """The calibration table as aligned text."""
    lines = [f"  {'correction':<16} {'FWER':>6}  {'95% interval':<16} {'nominal':>7}  {'detections':>10}  {'permutations':>12}"]
    for row in rows:
        interval = f"[{row['fwer_ci_low']:.3f}, {row['fwer_ci_high']:.3f}]"
        permutations = row["permutations"] if row["permutations"] == "n/a" else str(int(row["permutations"]))
        detections = f"{int(row['detections'])}/{int(row['datasets'])}"
        lines.append(f"  {row['correction']:<16} {row['fwer']:>6.3f}  {interval:<16} {row['nominal']:>7g}  {detections:>10}  {permutations:>12}")
    return "\n".join(lines)


def _kept_datasets(folder: Path, settings: dict[str, str]) -> int:
    """Datasets in chunk files of earlier runs that this run keeps (same settings)."""
    import numpy as np

    kept = 0
    for name, text in settings.items():
        wanted = json.loads(text)
        for path in (folder / name).glob("chunk-*.npz"):
            try:
                with np.load(path, allow_pickle=False) as archive:
                    if json.loads(str(archive["settings"])) == wanted:
                        kept += int(archive["datasets"].size)
            except (OSError, ValueError, KeyError):
                continue
    return kept


class _ProgressWatcher:
    """Prints 'null datasets done / total' on stderr from the chunk jobs' logs, every few seconds."""

    def __init__(self, logs: Path, *, total: int, kept: int, since: float, every: float = 3.0,
                 label: str = "calibration", unit: str = "null datasets", pattern: re.Pattern = _PROGRESS):
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
        """Datasets finished by chunk jobs of this run (their logs' last progress lines)."""
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
