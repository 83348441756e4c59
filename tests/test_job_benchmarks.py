"""Where the time went: Snakemake benchmark files summed per stage."""

import math

import pytest

from famwise.errors import UserError
from famwise.job_benchmarks import describe_stage_costs, read_benchmark, stage_costs

# The header Snakemake 9 writes (snakemake.benchmark.BenchmarkRecord.get_header).
HEADER = "s\th:m:s\tmax_rss\tmax_vms\tmax_uss\tmax_pss\tio_in\tio_out\tmean_load\tcpu_time\n"


def _benchmark(logs, stage, name, seconds, rss="120.50"):
    path = logs / stage / f"{name}.benchmark.tsv"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(HEADER + f"{seconds}\t0:00:01\t{rss}\t900.00\t100.00\t101.00\t0.10\t0.20\t95.00\t1.20\n")
    return path


def test_stages_are_summed_and_the_costliest_comes_first(tmp_path):
    logs = tmp_path / "logs"
    _benchmark(logs, "decompose", "01", 2.5, rss="310.25")
    _benchmark(logs, "decompose", "02", 3.0, rss="290.00")
    _benchmark(logs, "null_shard", "c-0", 7.0, rss="512.00")
    _benchmark(logs, "report", "all", 4.0, rss="NA")
    (logs / "report" / "all.log").write_text("not a benchmark\n")
    costs = stage_costs(logs)
    assert [c.stage for c in costs] == ["null_shard", "decompose", "report"]
    decompose = costs[1]
    assert (decompose.jobs, decompose.wall_s, decompose.longest_s, decompose.peak_mb) == (2, 5.5, 3.0, 310.25)
    assert costs[0].peak_mb == 512.0
    assert math.isnan(costs[2].peak_mb)

    text = describe_stage_costs(logs)
    lines = text.splitlines()
    assert lines[2].split() == ["null_shard", "1", "7.0", "s", "7.0", "s", "512", "MB"]
    assert lines[3].split() == ["decompose", "2", "5.5", "s", "3.0", "s", "310", "MB"]
    assert lines[4].split() == ["report", "1", "4.0", "s", "4.0", "s", "n/a"]
    assert lines[5].split()[:5] == ["all", "stages", "4", "16.5", "s"]


def test_a_repeated_benchmark_counts_its_last_row(tmp_path):
    path = _benchmark(tmp_path / "logs", "observed", "c", 1.0)
    path.write_text(path.read_text() + "2.0\t0:00:02\t64.00\t1\t1\t1\t0\t0\t50\t1\n")
    assert read_benchmark(path) == (2.0, 64.0)


def test_no_benchmark_files_means_no_table(tmp_path):
    assert describe_stage_costs(tmp_path / "logs") is None
    (tmp_path / "logs" / "decompose").mkdir(parents=True)
    assert stage_costs(tmp_path / "logs") == []


def test_a_file_that_is_not_a_benchmark_is_a_user_error(tmp_path):
    path = tmp_path / "logs" / "decompose" / "01.benchmark.tsv"
    path.parent.mkdir(parents=True)
    path.write_text("something else\n1\n")
    with pytest.raises(UserError, match=r"01.benchmark.tsv: not a Snakemake benchmark file"):
        stage_costs(tmp_path / "logs")
    path.write_text(HEADER + "soon\t0:00:01\t1\t1\t1\t1\t0\t0\t0\t0\n")
    with pytest.raises(UserError, match=r"01.benchmark.tsv: unreadable benchmark row"):
        stage_costs(tmp_path / "logs")
