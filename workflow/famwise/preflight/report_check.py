"""Channel lists of the spec (``report``, ``power.effect``), checked on the first subject's channels before any job runs."""

from famwise.errors import UserError
from famwise.preflight.where import Where
from famwise.spec.base import did_you_mean


def check_report_channels(plan, channels: list[str] | None, where: Where) -> None:
    """``report.time_course_channels`` are analysed channels (``channels``: the first subject's; None skips)."""
    report = plan.study.report
    wanted = report.time_course_channels if report is not None else None
    check_analysed_channels(plan, wanted, channels, where, ("report", "time_course_channels"))


def check_analysed_channels(plan, wanted: list[str] | None, channels: list[str] | None, where: Where, key) -> None:
    """Every name in ``wanted`` (spec list at ``key``) is an analysed channel; ``channels`` None skips the check.

    The spec's ``analysis.channels``, when given, narrow the data's channels
    (the spec check has already matched the names to it).
    """
    if not wanted or channels is None:
        return
    analysed = {name.lower() for name in plan.study.analysis.channels or []}
    if analysed:
        channels = [c for c in channels if c.lower() in analysed]
    for index, name in enumerate(wanted):
        if name not in channels:
            raise UserError(
                f"{where(*key, index)}: '{name}' is not an analysed channel"
                f"{did_you_mean(name, channels)} (the data have {len(channels)}: {', '.join(channels[:16])}"
                f"{', ...' if len(channels) > 16 else ''})"
            )
