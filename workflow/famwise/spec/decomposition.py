"""The spec's ``decomposition`` section: Morlet or multitaper time-frequency maps, or none (voltage maps).

With ``method: none`` each subject's map is the condition mean of the epochs'
voltage (``famwise.decomposition.voltage``); the frequency grid and the
wavelet and taper widths are not used, the measure is ``voltage`` and the
baseline is subtracted (mode ``subtract``).
"""

from typing import Literal

from pydantic import Field, field_validator, model_validator

from famwise.spec.base import LocatedError, SpecModel, check_window

BaselineMode = Literal["db", "percent", "zscore", "ratio", "subtract", "none"]
Measure = Literal["power", "induced", "itpc", "voltage"]
VOLTAGE_BASELINE_MS = (-200.0, 0.0)
"""The baseline window of voltage maps when the spec gives none, in ms."""
DECOMPOSITION_KEYS = ("frequencies", "cycles", "fwhm_ms", "taper_length_ms", "nw")
"""Keys of a time-frequency decomposition that method 'none' does not use."""


class FrequencyGrid(SpecModel):
    """Frequencies of the decomposition."""

    lowest_hz: float = Field(default=4.0, gt=0, description="Lowest frequency in Hz.")
    highest_hz: float = Field(default=40.0, gt=0, description="Highest frequency in Hz.")
    count: int = Field(default=20, ge=1, description="Number of frequencies.")
    spacing: Literal["linear", "log"] = Field(default="log", description="Linear or logarithmic spacing.")

    @model_validator(mode="after")
    def _ordered(self) -> "FrequencyGrid":
        if self.highest_hz < self.lowest_hz:
            raise LocatedError(
                ("highest_hz",), f"must be at least lowest_hz ({self.lowest_hz} Hz), got {self.highest_hz} Hz"
            )
        return self


class Baseline(SpecModel):
    """Baseline normalisation of time-frequency maps."""

    mode: BaselineMode = Field(
        default="db",
        description="'db' (10 log10 of the ratio), 'percent' change, 'zscore', 'ratio' or 'none'; for voltage maps "
        "(method 'none') 'subtract' (the window's mean voltage; the default there) or 'none'.",
    )
    window_ms: tuple[float, float] | None = Field(
        default=(-400.0, -100.0),
        description="Baseline window [start, end] in ms relative to the event (voltage maps: [-200, 0] by default).",
    )
    pooled: bool = Field(
        default=False, description="Baseline from all conditions together instead of each condition's own."
    )
    single_epoch: bool = Field(default=False, description="Normalise every epoch before averaging.")

    @field_validator("window_ms")
    @classmethod
    def _ordered(cls, value):
        return check_window(value, "ms")

    @model_validator(mode="after")
    def _window_needed(self) -> "Baseline":
        if self.mode != "none" and self.window_ms is None:
            raise LocatedError(("window_ms",), f"baseline mode '{self.mode}' needs a window_ms")
        return self


class Decomposition(SpecModel):
    """Per-subject time-frequency decomposition."""

    method: Literal["morlet", "multitaper", "none"] = Field(
        default="morlet",
        description="Complex Morlet wavelets, DPSS multitaper, or 'none': no decomposition, each condition's mean "
        "voltage in microvolts (points are channel x time).",
    )
    frequencies: FrequencyGrid = Field(default_factory=FrequencyGrid, description="Frequency grid.")
    cycles: float | tuple[float, float] | None = Field(
        default=7.0,
        description="Morlet width in cycles: a number, or [at lowest, at highest] frequency growing "
        "log-linearly. The default of 7 cycles is long-standing practice (Tallon-Baudry et al. 1997, J Neurosci) "
        "and applies to method 'morlet' when fwhm_ms is not given.",
    )
    fwhm_ms: float | tuple[float, float] | None = Field(
        default=None,
        description="Morlet width as temporal full width at half maximum in ms (a number or [at lowest, at highest]).",
    )
    taper_length_ms: float | None = Field(
        default=None, gt=0, description="Multitaper taper length in ms (one window of the DPSS tapers)."
    )
    nw: float | None = Field(
        default=None,
        gt=0,
        description="Multitaper time-half-bandwidth product NW (Percival & Walden 1993); 2NW - 1 tapers.",
    )
    measure: Measure = Field(
        default="power",
        description="'power' (total), 'induced' (the condition's average response removed first) or 'itpc' "
        "(inter-trial phase coherence); 'voltage' with method 'none' (its default there).",
    )
    time_step_ms: float | None = Field(
        default=20.0,
        gt=0,
        description="Output time step in ms (decimation after convolution; for method 'none' an anti-aliasing FIR "
        "decimator, and every sample by default); omit for every sample.",
    )
    lowpass_hz: float | None = Field(
        default=None,
        gt=0,
        description="Method 'none' only: cut-off in Hz of a zero-phase low-pass (Butterworth, order 4, run forward "
        "and backward) before averaging; omit for none.",
    )
    average: Literal["mean", "trimmed"] = Field(
        default="mean", description="Average over epochs: mean or trimmed mean."
    )
    trim: float = Field(default=0.2, ge=0, lt=0.5, description="Proportion trimmed from each end for the trimmed mean.")
    baseline: Baseline = Field(default_factory=Baseline, description="Baseline normalisation.")

    @field_validator("cycles", "fwhm_ms")
    @classmethod
    def _positive_width(cls, value):
        if value is not None and any(v <= 0 for v in (value if isinstance(value, tuple) else (value,))):
            raise ValueError(
                f"a wavelet width must be positive, got {list(value) if isinstance(value, tuple) else value}"
            )
        return value

    @model_validator(mode="before")
    @classmethod
    def _cycles_default_only_for_morlet(cls, data):
        """The cycles default does not apply when the width is given otherwise (fwhm_ms, multitaper)."""
        if (
            isinstance(data, dict)
            and "cycles" not in data
            and (data.get("fwhm_ms") is not None or data.get("method") == "multitaper")
        ):
            return {**data, "cycles": None}
        return data

    @model_validator(mode="before")
    @classmethod
    def _voltage_defaults(cls, data):
        """Method 'none' measures voltage, keeps every sample and subtracts the -200 to 0 ms mean unless told otherwise."""
        if not isinstance(data, dict) or data.get("method") != "none":
            return data
        baseline = data.get("baseline")
        if baseline is None or isinstance(baseline, dict):
            baseline = {"mode": "subtract", "window_ms": VOLTAGE_BASELINE_MS, **(baseline or {})}
        return {"measure": "voltage", "time_step_ms": None, "cycles": None, **data, "baseline": baseline}

    @model_validator(mode="after")
    def _voltage(self) -> "Decomposition":
        voltage = self.method == "none"
        if (self.measure == "voltage") != voltage:
            key = "method" if voltage else "measure"
            raise LocatedError((key,), "measure 'voltage' goes with method 'none' (no decomposition), and only with it")
        if not voltage:
            if self.baseline.mode == "subtract":
                raise LocatedError(("baseline", "mode"), "baseline mode 'subtract' is for voltage maps (method 'none')")
            if self.lowpass_hz is not None:
                raise LocatedError(("lowpass_hz",), "only used with method 'none' (voltage maps)")
            return self
        if self.baseline.mode not in ("subtract", "none"):
            raise LocatedError(
                ("baseline", "mode"),
                f"voltage maps take baseline mode 'subtract' or 'none', not '{self.baseline.mode}'",
            )
        if self.baseline.single_epoch:
            raise LocatedError(
                ("baseline", "single_epoch"),
                "voltage maps subtract the baseline of the average; single_epoch is not used",
            )
        for key in DECOMPOSITION_KEYS:
            if key in self.model_fields_set and getattr(self, key) is not None:
                raise LocatedError((key,), "not used with method 'none' (no decomposition)")
        return self

    @model_validator(mode="after")
    def _width(self) -> "Decomposition":
        if self.method == "none":
            return self
        if self.method == "morlet":
            if self.cycles is not None and self.fwhm_ms is not None:
                raise LocatedError(("fwhm_ms",), "give either cycles or fwhm_ms, not both")
            for key in ("taper_length_ms", "nw"):
                if getattr(self, key) is not None:
                    raise LocatedError((key,), "only used with method 'multitaper'")
        else:
            for key in ("taper_length_ms", "nw"):
                if getattr(self, key) is None:
                    raise LocatedError((key,), "method 'multitaper' needs taper_length_ms and nw")
            for key in ("cycles", "fwhm_ms"):
                if getattr(self, key) is not None:
                    raise LocatedError((key,), "only used with method 'morlet'")
        if self.measure == "itpc":
            if self.method != "morlet":
                raise LocatedError(("measure",), "'itpc' needs method 'morlet' (phase from a single wavelet)")
            if self.baseline.mode != "none":
                raise LocatedError(("baseline", "mode"), "'itpc' is a consistency in [0, 1]; use baseline mode 'none'")
            if self.average != "mean":
                raise LocatedError(("average",), "'itpc' averages unit phase vectors; use average 'mean'")
        if self.baseline.pooled and self.baseline.single_epoch:
            raise LocatedError(
                ("baseline", "single_epoch"), "a pooled baseline cannot also be applied epoch by epoch; choose one"
            )
        return self
