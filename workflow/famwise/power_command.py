"""The ``famwise power`` subcommand: simulate studies from the spec's data and print each correction's power.

``famwise power SPEC [--sizes 12,20,28] [--studies N] [--cores N]`` asks
Snakemake for ``power/<contrast>.tsv`` of every contrast the spec's
``power`` section names (building the contrast data first when needed).
Chunks of simulated studies are jobs: finished chunks are kept, so an
interrupted run resumes, and adding sample sizes or effect levels runs only
the new chunks. While it runs, the number of simulated studies done is
printed on stderr. When the study's report exists, it is rebuilt afterwards
so that it shows the power section.
"""

import json
import os
import re
import sys
import time
from pathlib import Path

from famwise.calibrate_command import _ProgressWatcher
from famwise.errors import UserError

_PROGRESS = re.compile(r"power \S+: \S+: n \d+: chunk \d+: (\d+)/(\d+) studies")


def add_parser(commands) -> None:
    """Add ``power`` to the CLI's subcommands (the ``add_subparsers`` object)."""
    parser = commands.add_parser(
        "power", help="plan a study's size: each correction's power in studies simulated from this study's own maps"
    )
    parser.add_argument("spec", type=Path)
    parser.add_argument("--sizes", help="sample sizes, comma-separated (default: power.sample_sizes of the spec)")
    parser.add_argument("--studies", type=int, help="simulated studies per size and effect (default: power.studies)")
    parser.add_argument("--cores", type=int, default=os.cpu_count() or 1, help="cores to use (default: all)")
    parser.set_defaults(handler=command_power)


def _sizes(text: str | None) -> list[int] | None:
    if not text:
        return None
    try:
        return [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise UserError(f"--sizes: give whole numbers separated by commas, e.g. 12,20,28; got {text!r}") from None


def command_power(args) -> int:
    """Handler of ``famwise power``."""
    from famwise.cli import _job_error, _snakemake
    from famwise.plan import Plan
    from famwise.power.settings import chunk_settings, effect_levels, power_contrasts, power_spec
    from famwise.power.table import read_table
    from famwise.power.text import format_rows

    plan = Plan.from_spec(args.spec)
    spec = power_spec(plan, sizes=_sizes(args.sizes), studies=args.studies)
    contrasts = power_contrasts(plan, spec)
    for name in contrasts:  # checks the settings here, before Snakemake sees them
        for effect in effect_levels(spec):
            chunk_settings(plan, spec, name, effect, spec.sample_sizes[0])
    config = {"power_sizes": ",".join(str(n) for n in spec.sample_sizes), "power_studies": spec.studies}
    levels = len(effect_levels(spec))
    total = spec.studies * len(spec.sample_sizes) * levels * len(contrasts)
    print(
        f"famwise: simulating {spec.studies} studies for each of {len(spec.sample_sizes)} sample sizes "
        f"({', '.join(map(str, spec.sample_sizes))}) and {levels} effect level(s) in {len(contrasts)} contrast(s)"
    )
    started = time.time()
    kept = _kept_studies(plan, spec, contrasts)
    watcher = _ProgressWatcher(
        plan.loaded.output / "logs" / "power_chunk",
        total=total,
        kept=kept,
        since=started,
        label="power",
        unit="simulated studies",
        pattern=_PROGRESS,
    )
    watcher.start()
    try:
        targets = [f"power/{name}.tsv" for name in contrasts]
        code, _ = _snakemake(plan, ["--cores", str(args.cores), *targets], capture=False, config=config)
    finally:
        watcher.stop()
    if code != 0:
        message = _job_error(plan, started)
        if message:
            raise UserError(message)
        print(
            f"famwise: the power simulation failed; see the logs under {plan.loaded.output / 'logs'}", file=sys.stderr
        )
        return 1
    for name in contrasts:
        path = plan.loaded.output / "power" / f"{name}.tsv"
        info = json.loads(path.with_suffix(".json").read_text(encoding="utf-8"))["Power"]
        print(f"\n{name} ({path}):")
        print(format_rows(read_table(path), info))
        print(f"  for a proposal: {path.with_suffix('.md')}")
    _update_report(plan, args, started)
    print(f"famwise: done in {time.time() - started:.1f} s")
    return 0


def _kept_studies(plan, spec, contrasts: list[str]) -> int:
    """Simulated studies in chunk files of earlier runs that this run keeps (same settings)."""
    import numpy as np

    from famwise.power.settings import chunk_files, chunk_settings

    kept = 0
    for name in contrasts:
        for relative in chunk_files(spec, name):
            path = plan.loaded.output / relative
            if not path.is_file():
                continue
            effect, size = relative.split("/")[2], int(relative.split("/")[3][1:])
            try:
                with np.load(path, allow_pickle=False) as archive:
                    if json.loads(str(archive["settings"])) == json.loads(
                        chunk_settings(plan, spec, name, effect, size)
                    ):
                        kept += int(archive["studies"].size)
            except (OSError, ValueError, KeyError):
                continue
    return kept


def _update_report(plan, args, started: float) -> None:
    from famwise.cli import _job_error, _snakemake

    report = plan.loaded.output / "report" / "index.html"
    if not report.is_file():
        print(f"\nfamwise: `famwise run {args.spec}` builds the report, which will include the power section")
        return
    print("\nfamwise: updating the report with the power section")
    code, _ = _snakemake(plan, ["--cores", str(args.cores), "report/index.html", "--forcerun", "report"], capture=False)
    if code != 0:
        raise UserError(
            _job_error(plan, started)
            or f"the report could not be updated; see the logs under {plan.loaded.output / 'logs'}"
        )
