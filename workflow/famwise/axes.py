"""The point axes of a map: (channel, frequency, time), and how a voltage map fills the frequency axis.

A voltage map (no decomposition) keeps the time-frequency layout with one
frequency entry of 0 Hz, a value no decomposition produces (their frequencies
are positive), so every stage can tell the two apart from the map itself.
"""

import numpy as np

VOLTAGE_FREQ_HZ = 0.0
"""The single frequency entry of a voltage map."""
FREQUENCY_COLUMNS = ("freq_low_hz", "freq_high_hz", "peak_freq_hz")
"""Cluster-table columns that a voltage map's table leaves out."""


def is_voltage(freqs) -> bool:
    """Whether ``freqs`` (Hz) is a voltage map's frequency axis: the single entry 0 Hz."""
    freqs = np.asarray(freqs, dtype=float).ravel()
    return freqs.size == 1 and freqs[0] == VOLTAGE_FREQ_HZ
