"""The ``famwise power`` subcommand: simulate studies from the spec's data and print each correction's power.

``famwise power SPEC [--sizes 12,20,28] [--studies N] [--cores N] [--profile DIR]`` asks
Snakemake for ``power/<contrast>.tsv`` of every contrast the spec's
``power`` section names (building the contrast data first when needed).
Shards of simulated studies are jobs: finished shards are kept, so an
interrupted run resumes, and adding sample sizes or effect levels runs only
the new shards. While it runs, the number of simulated studies done is
printed on stderr. When the study's report exists, it is rebuilt afterwards
so that it shows the power section.
"""

import json
import os
import re
import sys
import time
from pathlib import Path

from famwise import layout
from famwise.calibrate_command import ProgressWatcher
from famwise.errors import UserError
from famwise.launch import job_error, profile_options, run_snakemake
from famwise.settings_codec import to_json

_PROGRESS = re.compile(r"power \S+: \S+: n \d+: shard \d+: (\d+)/(\d+) studies")


def add_parser(commands) -> None:
    """Add ``power`` to the CLI's subcommands (the ``add_subparsers`` object)."""
    parser = commands.add_parser(
        "power", help="plan a study's size: each correction's power in studies simulated from this study's own maps"
    )
    parser.add_argument("spec", type=Path)
    parser.add_argument("--sizes", help="sample sizes, comma-separated (default: power.sample_sizes of the spec)")
    parser.add_argument("--studies", type=int, help="simulated studies per size and effect (default: power.studies)")
    parser.add_argument("--cores", type=int, default=os.cpu_count() or 1, help="cores to use (default: all)")
    parser.add_argument(
        "--profile", type=Path, metavar="DIR", help="Snakemake profile folder, e.g. configs/profiles/slurm"
    )
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
    from famwise.plan import Plan
    from famwise.power.settings import effect_levels, power_contrasts, power_spec
    from famwise.power.table import read_table
    from famwise.power.text import format_rows
    from famwise.preflight import Where, preflight
    from famwise.preflight.power_check import check_power_channels, check_power_sizes

    plan = Plan.from_spec(args.spec)
    spec = power_spec(plan, sizes=_sizes(args.sizes), studies=args.studies)
    preflight(plan)  # the mistakes `run` catches before its first job
    check_power_channels(plan, spec, plan.first_subject_channels(), Where(plan.loaded))
    contrasts = power_contrasts(plan, spec)
    check_power_sizes(plan, spec, contrasts, Where(plan.loaded))
    options = ["--cores", str(args.cores), *profile_options(args.profile)]
    config = {"power_sizes": ",".join(str(n) for n in spec.sample_sizes), "power_studies": spec.studies}
    levels = len(effect_levels(spec))
    total = spec.studies * len(spec.sample_sizes) * levels * len(contrasts)
    print(
        f"famwise: simulating {spec.studies} studies for each of {len(spec.sample_sizes)} sample sizes "
        f"({', '.join(map(str, spec.sample_sizes))}) and {levels} effect level(s) in {len(contrasts)} contrast(s)"
    )
    started = time.time()
    watcher = ProgressWatcher(
        plan.loaded.output / "logs" / "power_shard",
        total=total,
        kept=_kept_studies(plan, spec, contrasts),
        since=started,
        label="power",
        unit="simulated studies",
        pattern=_PROGRESS,
    )
    watcher.start()
    try:
        targets = [layout.power_files(name)["table"] for name in contrasts]
        code, _ = run_snakemake(plan, [*options, *targets], capture=False, config=config)
    finally:
        watcher.stop()
    if code != 0:
        message = job_error(plan, started)
        if message:
            raise UserError(message)
        print(
            f"famwise: the power simulation failed; see the logs under {plan.loaded.output / 'logs'}", file=sys.stderr
        )
        return 1
    for name in contrasts:
        files = {kind: plan.loaded.output / path for kind, path in layout.power_files(name).items()}
        info = json.loads(files["sidecar"].read_text(encoding="utf-8"))["Power"]
        print(f"\n{name} ({files['table']}):")
        print(format_rows(read_table(files["table"]), info))
        print(f"  for a proposal: {files['methods']}")
    _update_report(plan, args, options, config, started)
    print(f"famwise: done in {time.time() - started:.1f} s")
    return 0


def _kept_studies(plan, spec, contrasts: list[str]) -> int:
    """Simulated studies in shard files of earlier runs that this run keeps (same settings)."""
    from famwise.power.settings import effect_levels, power_shard_settings

    kept = 0
    for name in contrasts:
        for effect in effect_levels(spec):
            for n in spec.sample_sizes:
                wanted = to_json(power_shard_settings(plan, spec, name, effect, n))
                for k in range(spec.shards):
                    path = plan.loaded.output / layout.power_shard(name, effect, n, k)
                    kept += _studies_in(path, wanted)
    return kept


def _studies_in(path: Path, wanted: str) -> int:
    """Studies in one shard file computed with the settings ``wanted`` (0 when absent, unreadable or other)."""
    import numpy as np

    if not path.is_file():
        return 0
    try:
        with np.load(path, allow_pickle=False) as archive:
            return int(archive["studies"].size) if str(archive["settings"]) == wanted else 0
    except (OSError, ValueError, KeyError):
        return 0


def _update_report(plan, args, options: list[str], config: dict, started: float) -> None:
    """Rebuild an existing report, whose rule now declares the power files as inputs."""
    report = plan.loaded.output / layout.REPORT_PAGE
    if not report.is_file():
        print(f"\nfamwise: `famwise run {args.spec}` builds the report, which will include the power section")
        return
    print("\nfamwise: updating the report with the power section")
    code, _ = run_snakemake(plan, [*options, layout.REPORT_PAGE], capture=False, config=config)
    if code != 0:
        raise UserError(
            job_error(plan, started)
            or f"the report could not be updated; see the logs under {plan.loaded.output / 'logs'}"
        )
