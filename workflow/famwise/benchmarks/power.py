"""Benchmark: a power curve of the example study (``famwise power``), 6 sample sizes x 200 studies x 1,000 permutations."""

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from famwise.benchmarks import BenchRow

_TARGET_S = 20 * 60


def bench_power(quick: bool) -> BenchRow:
    """Time ``famwise power`` on the example study's own power section (full run only).

    The demo data are written and the pilot's contrast data and channel graph
    are built first, untimed; the row times the simulation itself: 6 sample
    sizes (8 to 20) x 200 simulated studies x 1,000 permutations, each study
    through the example's six corrections, on every core of the machine.
    There is no reference implementation: the target is absolute.
    """
    task = "power curve of the example study"
    if quick:
        return BenchRow(
            task, "skipped with --quick", 0.0, 0.0, "< 20 min", None, note="run `famwise bench` without --quick"
        )
    from famwise import layout
    from famwise.demo import write_demo
    from famwise.launch import run_snakemake
    from famwise.plan import Plan

    cores = os.cpu_count() or 1
    with tempfile.TemporaryDirectory() as folder:
        spec = write_demo(Path(folder))
        plan = Plan.from_spec(spec)
        code, lines = run_snakemake(
            plan, ["--cores", str(cores), layout.contrast_data("load-effect"), layout.CHANNEL_GRAPH], capture=True
        )
        if code != 0:
            raise RuntimeError("the example study's contrast data could not be built:\n" + "\n".join(lines[-15:]))
        started = time.perf_counter()
        subprocess.run(
            [sys.executable, "-m", "famwise.cli", "power", str(spec), "--cores", str(cores)],
            check=True,
            capture_output=True,
        )
        seconds = time.perf_counter() - started
    power = plan.study.power
    size = (
        f"16-subject pilot, {len(power.sample_sizes)} sample sizes x {power.studies} studies x "
        f"{plan.study.inference.permutations:,} permutations, 6 corrections, {cores} cores"
    )
    return BenchRow(
        task,
        size,
        seconds,
        0.0,
        "< 20 min",
        seconds < _TARGET_S,
        note="absolute target; a study stops a correction's permutations only once its decision at alpha is settled",
    )
