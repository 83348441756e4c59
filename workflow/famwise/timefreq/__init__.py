"""Time-frequency decomposition: Morlet wavelets and multitapers, baselines, ITPC.

Public API: `frequency_grid`, `decompose`, `TimeFreqMaps`, `load_timefreq`.
"""

from famwise.timefreq.decompose import decompose, frequency_grid
from famwise.timefreq.maps import TimeFreqMaps, load_timefreq

__all__ = ["TimeFreqMaps", "decompose", "frequency_grid", "load_timefreq"]
