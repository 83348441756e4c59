"""The study spec: one pydantic model tree, the single source of truth.

Choice types first, then one model per concern, then the root ``Study``;
the inference section's models live in ``famwise.spec.inference``, the
building blocks in ``famwise.spec.base``.
Every model rejects unknown keys and is frozen; every field has a
description. Checks across sections live in ``Study``'s after-validators and
raise ``LocatedError`` so that the message names the offending key.
"""

from typing import Literal

from pydantic import Field, field_validator, model_validator

from famwise.spec.base import (
    IDENTIFIER,
    LocatedError,
    SpecModel,
    check_name,
    check_relative,
    check_window,
    did_you_mean,
)
from famwise.spec.inference import (  # noqa: F401  (re-exported: the spec's models in one namespace)
    ClusterCorrection,
    Correction,
    Dimension,
    Family,
    Inference,
    MaxStatCorrection,
    PValueCorrection,
    StatisticName,
    Tail,
    TFCECorrection,
)
from famwise.spec.power import PowerSettings, check_power_contrasts
from famwise.spec.region import Analysis, PlannedRegion

SubjectSource = Literal["epochs", "maps", "bids"]
TestName = Literal["one-sample", "paired", "two-sample", "repeated-measures", "correlation"]
BaselineMode = Literal["db", "percent", "zscore", "ratio", "none"]
Measure = Literal["power", "induced", "itpc"]


class Subjects(SpecModel):
    """Where the subjects' data come from and who is in the study."""

    source: SubjectSource = Field(
        description="Input kind: 'epochs' (one NPZ of epoched data per subject), "
        "'maps' (one NPZ of time-frequency maps per subject) or 'bids' (a BIDS-EEG folder)."
    )
    path: str = Field(
        description="For 'epochs' and 'maps': a file pattern with '{subject}', relative to "
        "the spec's folder (e.g. 'data/sub-{subject}.npz') or absolute. For 'bids': the BIDS root folder.",
    )
    task: str | None = Field(
        default=None,
        description="BIDS task label (the 'task-<label>' part); required when the folder holds several tasks. A subject's runs and sessions of the task are pooled.",
    )
    ids: list[str] | None = Field(
        default=None,
        description="Subject ids to analyse (letters and digits only: they become file names). "
        "Omit to discover every subject matching 'path'.",
    )
    groups: dict[str, str] | None = Field(
        default=None,
        description="Group of each subject (id -> group name), for two-sample contrasts. "
        "With 'bids', omit to read the 'group' column of participants.tsv.",
    )
    covariates: dict[str, dict[str, float]] | None = Field(
        default=None,
        description="Per-subject covariates (covariate name -> id -> value), for correlation "
        "contrasts. With 'bids', omit to read the column of participants.tsv.",
    )
    exclude: dict[str, str] = Field(
        default_factory=dict, description="Subjects left out of the analysis, id -> reason (shown in the report)."
    )
    min_epochs: int = Field(default=10, ge=1, description="Fewest epochs a condition may keep after rejection.")

    @field_validator("path")
    @classmethod
    def _path_inside(cls, value: str) -> str:
        return check_relative(value)

    @field_validator("ids")
    @classmethod
    def _plain_ids(cls, value: list[str] | None) -> list[str] | None:
        if value is None:
            return value
        for subject in value:
            if not IDENTIFIER.match(subject):
                raise ValueError(
                    f"subject id {subject!r} is not a plain identifier (letters and digits only, "
                    "it becomes a file name); write e.g. '01' for 'sub-01'"
                )
        duplicates = sorted({s for s in value if value.count(s) > 1})
        if duplicates:
            raise ValueError(f"subject ids listed twice: {', '.join(duplicates)}")
        return value

    @model_validator(mode="after")
    def _pattern_has_subject(self) -> "Subjects":
        if self.source != "bids" and "{subject}" not in self.path:
            raise LocatedError(
                ("path",), f"pattern {self.path!r} must contain '{{subject}}' for source '{self.source}'"
            )
        return self


class EpochWindow(SpecModel):
    """How epochs are cut from continuous recordings (BIDS input)."""

    window_ms: tuple[float, float] = Field(
        default=(-500.0, 1500.0), description="Epoch window around each event, [start, end] in ms."
    )
    reject_peak_to_peak_uv: float | None = Field(
        default=None,
        gt=0,
        description="Reject epochs whose peak-to-peak amplitude on any channel exceeds this (microvolts); omit to keep all.",
    )
    reference: Literal["average", "none"] = Field(
        default="none", description="Re-reference to the average of all EEG channels, or keep the recorded reference."
    )

    @field_validator("window_ms")
    @classmethod
    def _ordered(cls, value):
        return check_window(value, "ms")


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
        default="db", description="'db' (10 log10 of the ratio), 'percent' change, 'zscore', 'ratio' or 'none'."
    )
    window_ms: tuple[float, float] | None = Field(
        default=(-400.0, -100.0), description="Baseline window [start, end] in ms relative to the event."
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

    method: Literal["morlet", "multitaper"] = Field(
        default="morlet", description="Complex Morlet wavelets or DPSS multitaper."
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
        description="'power' (total), 'induced' (the condition's average response removed first) or 'itpc' (inter-trial phase coherence).",
    )
    time_step_ms: float | None = Field(
        default=20.0, gt=0, description="Output time step in ms (decimation after convolution); omit for every sample."
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

    @model_validator(mode="after")
    def _width(self) -> "Decomposition":
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


class Neighbors(SpecModel):
    """How the channel neighbor graph is built."""

    method: Literal["delaunay", "distance", "edges"] = Field(
        default="delaunay",
        description="'delaunay' (triangulation of the 2-D projected positions; rim edges longer than twice the "
        "median edge are cut, or every edge longer than max_distance_mm when given), 'distance' "
        "(3-D distance up to max_distance_mm) or 'edges' (an edge-list TSV).",
    )
    max_distance_mm: float | None = Field(
        default=None,
        gt=0,
        description="Largest neighbor distance in mm (method 'distance'; optional cut for 'delaunay').",
    )
    edges_file: str | None = Field(default=None, description="TSV with columns channel_a, channel_b (method 'edges').")

    @field_validator("edges_file")
    @classmethod
    def _inside(cls, value):
        return check_relative(value)

    @model_validator(mode="after")
    def _needs(self) -> "Neighbors":
        if self.method == "distance" and self.max_distance_mm is None:
            raise LocatedError(("max_distance_mm",), "method 'distance' needs max_distance_mm")
        if self.method == "edges" and self.edges_file is None:
            raise LocatedError(("edges_file",), "method 'edges' needs edges_file")
        return self


class Channels(SpecModel):
    """Electrode positions and the channel neighbor graph."""

    positions: str = Field(
        default="10-10",
        description="'10-10' or '10-20' (idealised spherical positions from the systems' definitions, "
        "looked up by channel name), "
        "'bids' (each subject's _electrodes.tsv), or a TSV file of name, x, y, z.",
    )
    neighbors: Neighbors = Field(default_factory=Neighbors, description="Neighbor graph.")

    @field_validator("positions")
    @classmethod
    def _inside(cls, value):
        if value in ("10-10", "10-20", "bids"):
            return value
        return check_relative(value)


class Contrast(SpecModel):
    """One group-level question."""

    name: str = Field(description="Contrast name (letters, digits, '-', '_', '.'; it becomes a folder name).")
    test: TestName = Field(
        description="'one-sample', 'paired' (first minus second condition), 'two-sample' (first minus second group), 'repeated-measures' (F over 3+ conditions) or 'correlation' (with a covariate)."
    )
    conditions: list[str] = Field(
        min_length=1,
        description="Conditions compared: one (one-sample, two-sample, correlation), two (paired) or three or more (repeated-measures).",
    )
    groups: list[str] | None = Field(default=None, description="Two groups for 'two-sample' (first minus second).")
    covariate: str | None = Field(default=None, description="Covariate name for 'correlation'.")

    @field_validator("name")
    @classmethod
    def _name(cls, value):
        return check_name(value, "contrast name")

    @model_validator(mode="after")
    def _shape(self) -> "Contrast":
        wanted = {
            "one-sample": (1, 1),
            "paired": (2, 2),
            "two-sample": (1, 1),
            "correlation": (1, 1),
            "repeated-measures": (3, 99),
        }
        low, high = wanted[self.test]
        n = len(self.conditions)
        if not low <= n <= high:
            expected = f"{low}" if low == high else f"at least {low}"
            raise LocatedError(("conditions",), f"test '{self.test}' compares {expected} condition(s), got {n}")
        if self.test == "two-sample":
            if not self.groups or len(self.groups) != 2:
                raise LocatedError(("groups",), "test 'two-sample' needs groups: [first, second]")
        elif self.groups is not None:
            raise LocatedError(("groups",), f"groups are only used by 'two-sample', not '{self.test}'")
        if self.test == "correlation" and not self.covariate:
            raise LocatedError(("covariate",), "test 'correlation' needs a covariate")
        if self.test != "correlation" and self.covariate is not None:
            raise LocatedError(("covariate",), f"covariate is only used by 'correlation', not '{self.test}'")
        return self


class Study(SpecModel):
    """A famwise study spec (version 1)."""

    version: Literal[1] = Field(description="Spec format version; always 1.")
    name: str = Field(description="Study name (shown in the report).")
    output: str = Field(
        default="results",
        description="Output folder, relative to the spec's folder, or an absolute path (e.g. a scratch disk; `check` notes that the spec is then tied to this machine).",
    )
    seed: int = Field(default=1, ge=0, description="Seed of the permutation table; the same seed gives the same masks.")
    subjects: Subjects = Field(description="Subject inputs.")
    conditions: dict[str, list[str]] = Field(min_length=1, description="Condition name -> event labels pooled into it.")
    epochs: EpochWindow = Field(
        default_factory=EpochWindow, description="Epoching of continuous recordings (BIDS input)."
    )
    decomposition: Decomposition = Field(
        default_factory=Decomposition, description="Time-frequency decomposition (epochs and BIDS input)."
    )
    analysis: Analysis = Field(
        default_factory=Analysis, description="A-priori restriction of time, frequency and channels."
    )
    channels: Channels = Field(
        default_factory=Channels, description="Electrode positions and neighbor graph (cluster and TFCE corrections)."
    )
    contrasts: list[Contrast] = Field(min_length=1, description="Group-level contrasts.")
    inference: Inference = Field(description="Statistics, resampling and corrections.")
    planned_regions: list[PlannedRegion] = Field(
        default_factory=list,
        description="Regions named before looking at the data; the report gives each subject's mean over each, "
        "per condition and contrast: unbiased values, unlike those of a significant cluster.",
    )
    power: PowerSettings | None = Field(
        default=None,
        description="Sample-size planning by simulation from this study's maps (`famwise power`); omit when not planning.",
    )

    @field_validator("output")
    @classmethod
    def _output_inside(cls, value):
        return check_relative(value)

    @field_validator("conditions")
    @classmethod
    def _condition_names(cls, value):
        for name, labels in value.items():
            check_name(name, "condition name")
            if not labels:
                raise ValueError(f"condition '{name}' lists no event labels")
        return value

    @model_validator(mode="after")
    def _contrasts_refer_to_known_things(self) -> "Study":
        known = list(self.conditions)
        names = {}
        for index, contrast in enumerate(self.contrasts):
            if contrast.name in names:
                raise LocatedError(
                    ("contrasts", index, "name"),
                    f"duplicate contrast name '{contrast.name}' (also contrasts[{names[contrast.name]}])",
                )
            names[contrast.name] = index
            for condition in contrast.conditions:
                if condition not in self.conditions:
                    raise LocatedError(
                        ("contrasts", index, "conditions"),
                        f"unknown condition '{condition}' (known: {', '.join(known)}){did_you_mean(condition, known)}",
                    )
            if len(set(contrast.conditions)) != len(contrast.conditions):
                raise LocatedError(("contrasts", index, "conditions"), "a condition is listed twice")
            if contrast.groups is not None and self.subjects.groups is not None:
                present = sorted(set(self.subjects.groups.values()))
                for group in contrast.groups:
                    if group not in present:
                        raise LocatedError(
                            ("contrasts", index, "groups"),
                            f"unknown group '{group}' (known: {', '.join(present)}){did_you_mean(group, present)}",
                        )
            if contrast.covariate is not None and self.subjects.covariates is not None:
                present = sorted(self.subjects.covariates)
                if contrast.covariate not in present:
                    raise LocatedError(
                        ("contrasts", index, "covariate"),
                        f"unknown covariate '{contrast.covariate}' (known: {', '.join(present)}){did_you_mean(contrast.covariate, present)}",
                    )
        return self

    @model_validator(mode="after")
    def _subjects_consistent(self) -> "Study":
        ids = self.subjects.ids
        for subject in self.subjects.exclude:
            if not IDENTIFIER.match(subject):
                raise LocatedError(
                    ("subjects", "exclude", subject),
                    f"subject id {subject!r} is not a plain identifier (letters and digits only)",
                )
            if ids is not None and subject not in ids:
                raise LocatedError(
                    ("subjects", "exclude", subject), f"excluded subject '{subject}' is not in subjects.ids"
                )
        if self.subjects.groups is not None:
            for subject in self.subjects.groups:
                if not IDENTIFIER.match(subject):
                    raise LocatedError(
                        ("subjects", "groups", subject),
                        f"subject id {subject!r} is not a plain identifier (letters and digits only)",
                    )
        return self

    @model_validator(mode="after")
    def _analysis_inside_grid(self) -> "Study":
        band = self.analysis.freq_hz
        grid = self.decomposition.frequencies
        if band is not None and self.subjects.source != "maps":
            if band[1] < grid.lowest_hz or band[0] > grid.highest_hz:
                raise LocatedError(
                    ("analysis", "freq_hz"),
                    f"band [{band[0]}, {band[1]}] Hz lies outside the decomposed frequencies [{grid.lowest_hz}, {grid.highest_hz}] Hz",
                )
        return self

    @model_validator(mode="after")
    def _power_contrasts_known(self) -> "Study":
        check_power_contrasts(self.power, [c.name for c in self.contrasts])
        return self
