"""The analysed channels and the channel neighbor graph, checked on the first subject's channels."""

import warnings

from famwise.errors import UserError
from famwise.preflight.where import Where


def check_channels(plan, channels: list[str] | None, where: Where) -> list[str]:
    """``analysis.channels`` exist and the neighbor graph builds; return the graph's warnings."""
    if channels is None:
        return []
    wanted = plan.study.analysis.channels
    if wanted:
        lookup = {c.lower(): c for c in channels}
        unknown = [name for name in wanted if name.lower() not in lookup]
        if unknown:
            raise UserError(
                f"{where('analysis', 'channels')}: not in the data: {', '.join(unknown)} (channels: {', '.join(channels)})"
            )
        channels = [lookup[name.lower()] for name in wanted]
    spec = plan.study.channels
    if not plan.needs_graph or spec.positions == "bids":
        return []
    from famwise.electrodes import channel_graph

    n = spec.neighbors
    key = ("channels", "neighbors", "edges_file") if n.method == "edges" else ("channels", "positions")
    positions = spec.positions if spec.positions in ("10-10", "10-20") else plan.loaded.resolve(spec.positions)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            channel_graph(
                channels,
                positions=positions,
                method=n.method,
                max_distance_mm=n.max_distance_mm,
                edges_file=plan.loaded.resolve(n.edges_file) if n.edges_file else None,
            )
        except UserError as error:
            raise UserError(f"{where(*key)}: {error}") from None
    return [str(w.message) for w in caught]
