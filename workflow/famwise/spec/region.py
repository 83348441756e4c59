"""The spec's regions: the analysed region that defines the family of tests, and regions planned before the analysis."""

from pydantic import Field, field_validator

from famwise.spec.base import (
    SpecModel,
    check_window,
)


class Analysis(SpecModel):
    """The a-priori restriction that defines the family of tests."""

    time_ms: tuple[float, float] | None = Field(
        default=None,
        description="Time window [start, end] in ms, used as given. Omit for the window from the event (0 ms) to "
        "where the data free of edge effects (cone of influence) end: the pre-event baseline is not tested. "
        "Choose it before looking at the data.",
    )
    freq_hz: tuple[float, float] | None = Field(
        default=None, description="Frequency band [low, high] in Hz; omit for all frequencies."
    )
    channels: list[str] | None = Field(default=None, description="Channels to analyse; omit for all.")

    @field_validator("time_ms")
    @classmethod
    def _time_ordered(cls, value):
        return check_window(value, "ms")

    @field_validator("freq_hz")
    @classmethod
    def _freq_ordered(cls, value):
        return check_window(value, "Hz")


class PlannedRegion(SpecModel):
    """A region fixed before the analysis: each subject's mean over it is reported (not tested)."""

    name: str = Field(pattern=r"^[A-Za-z0-9_.-]+$", description="Region name (letters, digits, '-', '_', '.').")
    channels: list[str] = Field(min_length=1, description="Channels averaged over.")
    freq_hz: tuple[float, float] | None = Field(
        default=None, description="Frequency band [low, high] in Hz; omit for all frequencies (voltage maps have none)."
    )
    time_ms: tuple[float, float] = Field(description="Time window [start, end] in ms.")

    @field_validator("time_ms")
    @classmethod
    def _time_ordered(cls, value):
        return check_window(value, "ms")

    @field_validator("freq_hz")
    @classmethod
    def _freq_ordered(cls, value):
        return check_window(value, "Hz")
