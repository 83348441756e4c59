"""Run every benchmark row and print the table (``famwise bench``)."""

import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from dataclasses import asdict
from pathlib import Path

from famwise.benchmarks import BenchRow

NOOP_RERUNS = 3


def pipeline_noop(quick: bool) -> BenchRow:
    """The demo study's no-op rerun with a warm cache (full run only)."""
    if quick:
        return BenchRow(
            "no-op rerun of the demo pipeline",
            "skipped with --quick",
            0.0,
            0.0,
            "< 5 s",
            None,
            note="run `famwise bench` without --quick",
        )
    with tempfile.TemporaryDirectory() as folder:
        command = [sys.executable, "-m", "famwise.cli", "demo", folder, "--cores", str(os.cpu_count() or 1)]
        started = time.perf_counter()
        subprocess.run(command, check=True, capture_output=True)
        cold = time.perf_counter() - started
        reruns = sorted(_timed_rerun(folder) for _ in range(NOOP_RERUNS))
    warm = reruns[len(reruns) // 2]
    return BenchRow(
        "no-op rerun of the demo pipeline",
        "demo study (16 subjects, 2 contrasts, 6 corrections)",
        warm,
        cold,
        "< 5 s",
        warm < 5.0,
        note=f"median of {NOOP_RERUNS} reruns (range {reruns[0]:.1f}-{reruns[-1]:.1f} s); reference column = "
        f"the first (cold) run, {cold:.0f} s; the ratio is not the target here",
    )


def _timed_rerun(folder: str) -> float:
    """Wall seconds of one ``famwise run`` of the demo in ``folder`` (nothing to do)."""
    started = time.perf_counter()
    subprocess.run(
        [sys.executable, "-m", "famwise.cli", "run", f"{folder}/study.yaml"], check=True, capture_output=True
    )
    return time.perf_counter() - started


def _rows(quick: bool):
    from famwise.benchmarks.clusters import bench_clusters
    from famwise.benchmarks.decomposition import bench_decomposition
    from famwise.benchmarks.designs import bench_between_groups_null
    from famwise.benchmarks.power import bench_power
    from famwise.benchmarks.regression import bench_regression_null
    from famwise.benchmarks.stats import bench_maxt_null
    from famwise.benchmarks.stepdown import bench_stepdown
    from famwise.benchmarks.voltage import bench_voltage

    yield bench_decomposition(quick)
    yield bench_voltage(quick)
    yield from bench_maxt_null(quick)
    yield bench_regression_null(quick)
    yield bench_between_groups_null(quick)
    yield bench_stepdown(quick)
    yield from bench_clusters(quick)
    yield pipeline_noop(quick)
    yield bench_power(quick)


def format_row(row: BenchRow) -> str:
    memory = f"{row.peak_memory_mb:7.0f}" if row.peak_memory_mb is not None else "      -"
    ratio = f"{row.ratio:8.1f}x" if row.reference_s > 0 else "        -"
    verdict = "skipped" if row.met is None else "yes" if row.met else "NO"
    return (
        f"{row.task:<38} {row.famwise_s:9.2f} {row.reference_s:10.2f} {ratio} {row.target:>9} {verdict:>7} {memory}\n    size: {row.size}"
        + (f"\n    note: {row.note}" if row.note else "")
    )


def run_benchmarks(*, quick: bool, json_path: Path | None) -> int:
    """Print the benchmark table (and write it as JSON); exit status 0 whatever the ratios."""
    print(
        f"famwise bench{' --quick' if quick else ''}: {platform.processor() or platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}"
    )
    print(f"{'task':<38} {'famwise s':>9} {'reference s':>10} {'ratio':>9} {'target':>9} {'met':>7} {'peak MB':>7}")
    rows = []
    for row in _rows(quick):
        rows.append(row)
        print(format_row(row), flush=True)
    if json_path:
        json_path.write_text(json.dumps([asdict(r) | {"ratio": r.ratio} for r in rows], indent=2) + "\n")
    return 0
