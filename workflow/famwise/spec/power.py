"""The spec's optional ``power`` section: sample-size planning by simulation (``famwise power``)."""

from typing import Literal

from pydantic import Field, field_validator, model_validator

from famwise.spec.base import LocatedError, SpecModel, check_window


class PowerEffect(SpecModel):
    """The effect put into every simulated study, and the region it occupies."""

    source: Literal["pilot", "specified"] = Field(
        default="pilot",
        description="'pilot': the pilot's own observed group effect times each factor of 'scale' (inflated by "
        "selection: try factors below 1); 'specified': a standardised size 'd' in the region, zero elsewhere.",
    )
    scale: list[float] = Field(
        default_factory=lambda: [0.5, 0.75, 1.0],
        min_length=1,
        description="Factors the pilot's observed effect is multiplied by (source 'pilot'); one power curve each.",
    )
    d: list[float] | None = Field(
        default=None,
        min_length=1,
        description="Standardised effect sizes (source 'specified'): Cohen's d (d_z for one-sample, paired and "
        "weighted, d over the pooled SD for two-sample), Cohen's f (between-groups: group means equally spaced in "
        "the listed order), Pearson's r (correlation) or the partial r of the tested covariate given the nuisance "
        "covariates (regression); one power curve each.",
    )
    channels: list[str] | None = Field(
        default=None, description="Channels of the effect region; omit for all analysed channels."
    )
    freq_hz: tuple[float, float] | None = Field(
        default=None,
        description="Frequency band [low, high] of the effect region in Hz; omit for all (voltage maps have none).",
    )
    time_ms: tuple[float, float] | None = Field(
        default=None, description="Time window [start, end] of the effect region in ms; omit for all."
    )

    @field_validator("freq_hz")
    @classmethod
    def _band(cls, value):
        return check_window(value, "Hz")

    @field_validator("time_ms")
    @classmethod
    def _window(cls, value):
        return check_window(value, "ms")

    @field_validator("scale")
    @classmethod
    def _positive_scale(cls, value):
        if any(v < 0 for v in value):
            raise ValueError("scale factors must be at least 0")
        if len(set(value)) != len(value):
            raise ValueError("a scale factor is listed twice")
        return value

    @field_validator("d")
    @classmethod
    def _distinct_sizes(cls, value):
        if value is not None and len(set(value)) != len(value):
            raise ValueError("an effect size is listed twice")
        return value

    @model_validator(mode="after")
    def _sizes(self) -> "PowerEffect":
        if self.source == "specified" and self.d is None:
            raise LocatedError(("d",), "source 'specified' needs d: the standardised effect size(s)")
        if self.source == "pilot" and self.d is not None:
            raise LocatedError(("d",), "d is only used with source 'specified'; the pilot effect is scaled by 'scale'")
        return self


class PowerSettings(SpecModel):
    """Sample-size planning: the power of every correction in studies simulated from this study's maps."""

    sample_sizes: list[int] = Field(
        default_factory=lambda: [12, 20, 28, 36, 44, 60],
        min_length=1,
        description="Numbers of participants to simulate (two-sample, between-groups: in total, split as in the pilot).",
    )
    studies: int = Field(default=200, ge=1, description="Simulated studies per sample size and effect.")
    target: float = Field(
        default=0.8,
        gt=0,
        lt=1,
        description="Target power: the smallest sample size reaching it is reported per correction.",
    )
    permutations: int | None = Field(
        default=None, ge=1, description="Permutations per simulated study; omit for inference.permutations."
    )
    shards: int = Field(
        default=4,
        ge=1,
        description="Jobs per sample size and effect (each writes one file); results do not depend on it.",
    )
    contrasts: list[str] | None = Field(default=None, description="Contrasts to simulate; omit for all.")
    effect: PowerEffect = Field(default_factory=PowerEffect, description="The effect added to the simulated studies.")

    @field_validator("sample_sizes")
    @classmethod
    def _sizes(cls, value):
        small = [n for n in value if n < 4]
        if small:
            raise ValueError(f"sample sizes must be at least 4, got {small[0]}")
        if len(set(value)) != len(value):
            raise ValueError("a sample size is listed twice")
        return sorted(value)

    @model_validator(mode="after")
    def _shards(self) -> "PowerSettings":
        if self.shards > self.studies:
            raise LocatedError(("shards",), f"shards ({self.shards}) cannot exceed studies ({self.studies})")
        return self


def check_power_contrasts(power: PowerSettings | None, contrasts: list[str]) -> None:
    """``power.contrasts`` must name contrasts of the study (LocatedError relative to the study)."""
    for index, name in enumerate((power.contrasts or []) if power is not None else []):
        if name not in contrasts:
            raise LocatedError(
                ("power", "contrasts", index), f"unknown contrast '{name}' (known: {', '.join(contrasts)})"
            )
