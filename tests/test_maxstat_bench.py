"""The step-down benchmark runs at its quick size and checks famwise against the reference itself."""

from famwise.benchmarks import BenchRow
from famwise.benchmarks.stepdown import bench_stepdown


def test_quick_step_down_bench():
    row = bench_stepdown(quick=True)  # raises if famwise and the reference disagree on the same maps
    assert isinstance(row, BenchRow)
    assert row.size == "24 subjects x 28,800 points x 200 sign flips"
    assert row.famwise_s > 0 and row.reference_s > 0 and row.target == ">= 10x"
    assert row.met == (row.ratio >= 10)
    assert "identical adjusted p" in row.note and "significant points" in row.note


def test_ratio_of_a_row_against_a_floor_is_famwise_over_the_floor():
    against_reference = BenchRow("t", "s", famwise_s=2.0, reference_s=10.0, target=">= 5x", met=True)
    against_floor = BenchRow(
        "t", "s", famwise_s=2.0, reference_s=0.8, target="<= 3x the matmul", met=True, slower_is_ratio=True
    )
    assert against_reference.ratio == 5.0 and against_floor.ratio == 2.5


def test_a_skipped_row_says_skipped_not_yes():
    from famwise.benchmarks.run import format_row, pipeline_noop

    line = format_row(pipeline_noop(quick=True)).splitlines()[0]
    assert " skipped " in line and " yes " not in line
