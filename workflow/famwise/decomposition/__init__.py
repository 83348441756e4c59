"""Per-subject maps: Morlet wavelets and multitapers, baselines, ITPC; or voltage maps without decomposition.

Public API: `frequency_grid`, `decompose`, `voltage_maps`, `TimeFreqMaps`, `load_maps`.
"""

from famwise.decomposition.decompose import decompose, frequency_grid
from famwise.decomposition.maps import TimeFreqMaps, load_maps
from famwise.decomposition.voltage import voltage_maps

__all__ = ["TimeFreqMaps", "decompose", "frequency_grid", "load_maps", "voltage_maps"]
