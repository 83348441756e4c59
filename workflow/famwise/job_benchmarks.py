"""Where a run's time went: wall time and peak memory per stage, from Snakemake's benchmark files.

Every rule writes ``logs/<stage>/<name>.benchmark.tsv`` beside its log (Snakemake's
``benchmark:`` directive): a header line, then one row per measured run of the job
with ``s`` (wall time, seconds) and ``max_rss`` (resident memory of the job's
process tree, MB, sampled every 0.5 s for the first 15 s and every 30 s after, so a
short burst can be missed; ``NA`` when no sample was taken). A job that reruns
overwrites its file, so the files hold each job's latest run.
"""

import csv
import math
from dataclasses import dataclass
from pathlib import Path

from famwise.errors import UserError

BENCHMARK_SUFFIX = ".benchmark.tsv"


@dataclass(frozen=True)
class StageCost:
    """The jobs of one stage (one ``logs/<stage>/`` folder).

    Attributes
    ----------
    stage : str
        Folder name under ``logs/`` (the rule, or ``correct`` for both correction rules).
    jobs : int
        Benchmark files found.
    wall_s : float
        Wall time of all jobs added up, seconds (jobs may have run side by side).
    longest_s : float
        Wall time of the slowest job, seconds.
    peak_mb : float
        Largest sampled resident memory of any job, MB; NaN when none was sampled.
    """

    stage: str
    jobs: int
    wall_s: float
    longest_s: float
    peak_mb: float


def read_benchmark(path: Path) -> tuple[float, float]:
    """One job's wall time (s) and peak memory (MB, NaN if not sampled); the last row if there are several."""
    with open(path, newline="") as handle:
        rows = list(csv.DictReader(handle, delimiter="\t"))
    if not rows or "s" not in rows[-1] or "max_rss" not in rows[-1]:
        raise UserError(f"{path}: not a Snakemake benchmark file (expected a header with 's' and 'max_rss' and a row)")
    row = rows[-1]
    try:
        wall = float(row["s"])
        memory = math.nan if row["max_rss"] in ("NA", "-", "") else float(row["max_rss"])
    except (TypeError, ValueError):
        raise UserError(f"{path}: unreadable benchmark row {row}") from None
    return wall, memory


def stage_costs(logs: Path) -> list[StageCost]:
    """Sum the benchmark files under ``logs`` per stage, the most time-consuming stage first."""
    per_stage: dict[str, list[tuple[float, float]]] = {}
    for path in sorted(Path(logs).glob(f"*/*{BENCHMARK_SUFFIX}")):
        per_stage.setdefault(path.parent.name, []).append(read_benchmark(path))
    costs = []
    for stage, records in per_stage.items():
        walls = [wall for wall, _ in records]
        memories = [memory for _, memory in records if not math.isnan(memory)]
        costs.append(
            StageCost(
                stage=stage,
                jobs=len(records),
                wall_s=sum(walls),
                longest_s=max(walls),
                peak_mb=max(memories) if memories else math.nan,
            )
        )
    return sorted(costs, key=lambda cost: (-cost.wall_s, cost.stage))


def describe_stage_costs(logs: Path) -> str | None:
    """A plain-text table of :func:`stage_costs` for ``famwise check``; None when no job has run yet."""
    costs = stage_costs(logs)
    if not costs:
        return None
    lines = [
        f"Where the time went (each job's latest run, from {Path(logs).name}/<stage>/*{BENCHMARK_SUFFIX}):",
        f"  {'stage':<22} {'jobs':>5} {'wall time':>11} {'longest job':>12} {'peak memory':>12}",
    ]
    for cost in costs:
        memory = "n/a" if math.isnan(cost.peak_mb) else f"{cost.peak_mb:.0f} MB"
        lines.append(f"  {cost.stage:<22} {cost.jobs:>5} {cost.wall_s:>9.1f} s {cost.longest_s:>10.1f} s {memory:>12}")
    total = sum(cost.wall_s for cost in costs)
    lines.append(
        f"  {'all stages':<22} {sum(cost.jobs for cost in costs):>5} {total:>9.1f} s"
        "   (job wall times added up; jobs may have run side by side)"
    )
    return "\n".join(lines)
