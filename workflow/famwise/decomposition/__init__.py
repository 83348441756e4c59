"""Time-frequency decomposition: Morlet wavelets and multitapers, baselines, ITPC.

Public API: `frequency_grid`, `decompose`, `TimeFreqMaps`, `load_maps`.
"""

from famwise.decomposition.decompose import decompose, frequency_grid
from famwise.decomposition.maps import TimeFreqMaps, load_maps

__all__ = ["TimeFreqMaps", "decompose", "frequency_grid", "load_maps"]
