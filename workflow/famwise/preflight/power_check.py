"""The ``power`` section's effect region, checked on the first subject's channels before any power job runs."""

from famwise.errors import UserError
from famwise.preflight.where import Where
from famwise.spec.base import did_you_mean


def check_power_channels(plan, spec, channels: list[str] | None, where: Where) -> None:
    """``power.effect.channels`` are analysed channels (``channels``: the first subject's; None skips the check).

    ``spec`` is the power section (`famwise.power.settings.power_spec`).
    """
    wanted = spec.effect.channels
    if not wanted or channels is None:
        return
    analysed = {name.lower() for name in plan.study.analysis.channels or []}
    if analysed:
        channels = [c for c in channels if c.lower() in analysed]
    for index, name in enumerate(wanted):
        if name not in channels:
            raise UserError(
                f"{where('power', 'effect', 'channels', index)}: '{name}' is not an analysed channel"
                f"{did_you_mean(name, channels)} (analysed: {', '.join(channels)})"
            )
