"""The spec's ``report`` section: choices of what the report draws (never of what is tested)."""

from pydantic import Field, field_validator

from famwise.spec.base import LocatedError, SpecModel, did_you_mean


class ReportOptions(SpecModel):
    """What the report draws."""

    time_course_channels: list[str] | None = Field(
        default=None,
        min_length=1,
        description="Voltage studies (decomposition.method 'none'): the channels whose time course each contrast's "
        "figures show, with the span significant there, e.g. [Pz]; several are averaged (the span: times "
        "significant at any of them). Omit for each contrast's peak channel. Must be analysed channels.",
    )

    @field_validator("time_course_channels")
    @classmethod
    def _listed_once(cls, value):
        if value is not None and len(set(value)) != len(value):
            raise ValueError("a channel is listed twice")
        return value


def check_report_options(report: ReportOptions | None, *, voltage: bool, analysed: list[str] | None) -> None:
    """The report section fits the study: time courses only for voltage maps, of analysed channels.

    ``analysed`` is the spec's ``analysis.channels`` (None: every channel of the data, checked before the run).
    """
    wanted = report.time_course_channels if report is not None else None
    if not wanted:
        return
    if not voltage:
        raise LocatedError(
            ("report", "time_course_channels"),
            "only used by voltage studies (decomposition.method 'none'); time-frequency figures show the peak channel",
        )
    for index, name in enumerate(wanted):
        if analysed is not None and name not in analysed:
            raise LocatedError(
                ("report", "time_course_channels", index),
                f"'{name}' is not an analysed channel{did_you_mean(name, analysed)} "
                f"(analysis.channels: {', '.join(analysed)})",
            )
