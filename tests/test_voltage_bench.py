"""The voltage-map benchmark runs at its quick size and checks famwise against the per-epoch route."""

from famwise.benchmarks.voltage import bench_voltage


def test_quick_voltage_bench():
    # reference: scipy.signal.decimate on every epoch, then numpy's mean and baseline subtraction
    row = bench_voltage(quick=True)
    assert row.size == "60 epochs x 8 channels x 2.5 s at 500 Hz, 10 ms step" and row.target == "< 1 s"
    assert row.met and row.famwise_s < 1.0
    largest = float(row.note.rsplit("largest difference ", 1)[1].split()[0])
    assert largest < 1e-3
