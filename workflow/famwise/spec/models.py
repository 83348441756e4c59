"""The study spec: one pydantic model tree, the single source of truth.

Choice types first, then one model per concern, then the root ``Study``.
Every model rejects unknown keys and is frozen; every field has a
description. Checks across sections live in ``Study``'s after-validators and
raise ``LocatedError`` so that the message names the offending key.
"""

import re
from pathlib import PurePosixPath
from typing import Annotated, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from famwise.spec.power import PowerSettings

SubjectSource = Literal["epochs", "timefreq", "bids"]
TestName = Literal["one-sample", "paired", "two-sample", "repeated-measures", "correlation"]
Tail = Literal["two-sided", "greater", "less"]
StatisticName = Literal["t", "yuen"]
Family = Literal["per-contrast", "all-contrasts"]
PValueMethod = Literal["bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by"]
BaselineMode = Literal["db", "percent", "zscore", "ratio", "none"]
Measure = Literal["power", "induced", "itpc"]
Dimension = Literal["channel", "freq", "time"]

IDENTIFIER = re.compile(r"^[A-Za-z0-9]+$")
NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


class LocatedError(ValueError):
    """A cross-field problem with the key path (relative to the model) it concerns."""

    def __init__(self, loc: tuple, message: str):
        super().__init__(message)
        self.loc = loc
        self.message = message


class SpecModel(BaseModel):
    """Base of every spec model: unknown keys rejected, frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True)


def _check_name(value: str, what: str) -> str:
    if not NAME.match(value):
        raise ValueError(
            f"{what} {value!r} must start with a letter or digit and contain only "
            "letters, digits, '-', '_' and '.' (it becomes a folder name)"
        )
    return value


def _check_relative(value: str | None) -> str | None:
    """Paths are relative to the spec's folder and must stay inside it."""
    if value is None:
        return value
    path = PurePosixPath(value.replace("\\", "/"))
    if path.is_absolute() or ".." in path.parts:
        raise ValueError(
            f"path {value!r} leaves the study folder; give a path relative to the "
            "spec file's folder, without '..'"
        )
    return value


def _check_window(value: tuple[float, float] | None, unit: str) -> tuple[float, float] | None:
    if value is not None and not value[0] < value[1]:
        raise ValueError(f"window must be [start, end] with start < end, got [{value[0]}, {value[1]}] {unit}")
    return value


class Subjects(SpecModel):
    """Where the subjects' data come from and who is in the study."""

    source: SubjectSource = Field(
        description="Input kind: 'epochs' (one NPZ of epoched data per subject), "
        "'timefreq' (one NPZ of time-frequency maps per subject) or 'bids' (a BIDS-EEG folder)."
    )
    path: str = Field(
        description="For 'epochs' and 'timefreq': a file pattern with '{subject}', relative to "
        "the spec's folder (e.g. 'data/sub-{subject}.npz'). For 'bids': the BIDS root folder."
    )
    task: str | None = Field(default=None, description="BIDS task label (the 'task-<label>' part); required when the folder holds several tasks. A subject's runs and sessions of the task are pooled.")
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
        return _check_relative(value)

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
            raise LocatedError(("path",), f"pattern {self.path!r} must contain '{{subject}}' for source '{self.source}'")
        return self


class EpochWindow(SpecModel):
    """How epochs are cut from continuous recordings (BIDS input)."""

    window_ms: tuple[float, float] = Field(
        default=(-500.0, 1500.0), description="Epoch window around each event, [start, end] in ms."
    )
    reject_peak_to_peak_uv: float | None = Field(
        default=None, gt=0, description="Reject epochs whose peak-to-peak amplitude on any channel exceeds this (microvolts); omit to keep all."
    )
    reference: Literal["average", "none"] = Field(default="none", description="Re-reference to the average of all EEG channels, or keep the recorded reference.")

    @field_validator("window_ms")
    @classmethod
    def _ordered(cls, value):
        return _check_window(value, "ms")


class FrequencyGrid(SpecModel):
    """Frequencies of the decomposition."""

    start_hz: float = Field(default=4.0, gt=0, description="Lowest frequency in Hz.")
    stop_hz: float = Field(default=40.0, gt=0, description="Highest frequency in Hz.")
    count: int = Field(default=20, ge=1, description="Number of frequencies.")
    spacing: Literal["linear", "log"] = Field(default="log", description="Linear or logarithmic spacing.")

    @model_validator(mode="after")
    def _ordered(self) -> "FrequencyGrid":
        if self.stop_hz < self.start_hz:
            raise LocatedError(("stop_hz",), f"must be at least start_hz ({self.start_hz} Hz), got {self.stop_hz} Hz")
        return self


class Baseline(SpecModel):
    """Baseline normalisation of time-frequency maps."""

    mode: BaselineMode = Field(default="db", description="'db' (10 log10 of the ratio), 'percent' change, 'zscore', 'ratio' or 'none'.")
    window_ms: tuple[float, float] | None = Field(default=(-400.0, -100.0), description="Baseline window [start, end] in ms relative to the event.")
    pooled: bool = Field(default=False, description="Baseline from all conditions together instead of each condition's own.")
    single_trial: bool = Field(default=False, description="Normalise every trial before averaging.")

    @field_validator("window_ms")
    @classmethod
    def _ordered(cls, value):
        return _check_window(value, "ms")

    @model_validator(mode="after")
    def _window_needed(self) -> "Baseline":
        if self.mode != "none" and self.window_ms is None:
            raise LocatedError(("window_ms",), f"baseline mode '{self.mode}' needs a window_ms")
        return self


class Timefreq(SpecModel):
    """Per-subject time-frequency decomposition."""

    method: Literal["morlet", "multitaper"] = Field(default="morlet", description="Complex Morlet wavelets or DPSS multitaper.")
    freqs_hz: FrequencyGrid = Field(default_factory=FrequencyGrid, description="Frequency grid.")
    cycles: float | tuple[float, float] | None = Field(
        default=None,
        description="Morlet width in cycles: a number, or [at lowest, at highest] frequency growing "
        "log-linearly. Default 7 when neither cycles nor fwhm_ms is given.",
    )
    fwhm_ms: float | tuple[float, float] | None = Field(
        default=None, description="Morlet width as temporal full width at half maximum in ms (a number or [at lowest, at highest])."
    )
    window_ms: float | None = Field(default=None, gt=0, description="Multitaper window length in ms.")
    time_bandwidth: float | None = Field(default=None, gt=0, description="Multitaper time-bandwidth product NW (tapers = 2NW - 1).")
    measure: Measure = Field(default="power", description="'power' (total), 'induced' (the condition's average response removed first) or 'itpc' (inter-trial phase coherence).")
    time_step_ms: float | None = Field(default=20.0, gt=0, description="Output time step in ms (decimation after convolution); omit for every sample.")
    average: Literal["mean", "trimmed"] = Field(default="mean", description="Average over epochs: mean or trimmed mean.")
    trim: float = Field(default=0.2, ge=0, lt=0.5, description="Proportion trimmed from each end for the trimmed mean.")
    baseline: Baseline = Field(default_factory=Baseline, description="Baseline normalisation.")

    @model_validator(mode="after")
    def _width(self) -> "Timefreq":
        if self.method == "morlet":
            if self.cycles is not None and self.fwhm_ms is not None:
                raise LocatedError(("fwhm_ms",), "give either cycles or fwhm_ms, not both")
            for key in ("window_ms", "time_bandwidth"):
                if getattr(self, key) is not None:
                    raise LocatedError((key,), "only used with method 'multitaper'")
        else:
            for key in ("window_ms", "time_bandwidth"):
                if getattr(self, key) is None:
                    raise LocatedError((key,), "method 'multitaper' needs window_ms and time_bandwidth")
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
        if self.baseline.pooled and self.baseline.single_trial:
            raise LocatedError(("baseline", "single_trial"), "a pooled baseline cannot also be applied trial by trial; choose one")
        return self

    def morlet_width(self) -> dict:
        """cycles / fwhm_ms as the decomposition expects them (7 cycles by default)."""
        if self.method != "morlet":
            return {"cycles": None, "fwhm_ms": None}
        if self.cycles is None and self.fwhm_ms is None:
            return {"cycles": 7.0, "fwhm_ms": None}
        return {"cycles": self.cycles, "fwhm_ms": self.fwhm_ms}


class Analysis(SpecModel):
    """The a-priori restriction that defines the family of tests."""

    time_ms: tuple[float, float] | None = Field(
        default=None,
        description="Time window [start, end] in ms. Omit for the widest window free of edge effects "
        "(cone of influence). Choose it before looking at the data.",
    )
    freq_hz: tuple[float, float] | None = Field(default=None, description="Frequency band [low, high] in Hz; omit for all frequencies.")
    channels: list[str] | None = Field(default=None, description="Channels to analyse; omit for all.")

    @field_validator("time_ms")
    @classmethod
    def _time_ordered(cls, value):
        return _check_window(value, "ms")

    @field_validator("freq_hz")
    @classmethod
    def _freq_ordered(cls, value):
        return _check_window(value, "Hz")


class Neighbors(SpecModel):
    """How the channel neighbor graph is built."""

    method: Literal["delaunay", "distance", "edges"] = Field(
        default="delaunay",
        description="'delaunay' (triangulation of the 2-D projected positions; rim edges longer than twice the "
        "median edge are cut, or every edge longer than max_distance_mm when given), 'distance' "
        "(3-D distance up to max_distance_mm) or 'edges' (an edge-list TSV).",
    )
    max_distance_mm: float | None = Field(default=None, gt=0, description="Largest neighbor distance in mm (method 'distance'; optional cut for 'delaunay').")
    edges_file: str | None = Field(default=None, description="TSV with columns channel_a, channel_b (method 'edges').")

    @field_validator("edges_file")
    @classmethod
    def _inside(cls, value):
        return _check_relative(value)

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
        default="standard-10-10",
        description="'standard-10-10' or 'standard-10-20' (positions from the channel names), "
        "'bids' (each subject's _electrodes.tsv), or a TSV file of name, x, y, z.",
    )
    neighbors: Neighbors = Field(default_factory=Neighbors, description="Neighbor graph.")

    @field_validator("positions")
    @classmethod
    def _inside(cls, value):
        if value in ("standard-10-10", "standard-10-20", "bids"):
            return value
        return _check_relative(value)


class Contrast(SpecModel):
    """One group-level question."""

    name: str = Field(description="Contrast name (letters, digits, '-', '_', '.'; it becomes a folder name).")
    test: TestName = Field(description="'one-sample', 'paired' (first minus second condition), 'two-sample' (first minus second group), 'repeated-measures' (F over 3+ conditions) or 'correlation' (with a covariate).")
    conditions: list[str] = Field(min_length=1, description="Conditions compared: one (one-sample, two-sample, correlation), two (paired) or three or more (repeated-measures).")
    groups: list[str] | None = Field(default=None, description="Two groups for 'two-sample' (first minus second).")
    covariate: str | None = Field(default=None, description="Covariate name for 'correlation'.")

    @field_validator("name")
    @classmethod
    def _name(cls, value):
        return _check_name(value, "contrast name")

    @model_validator(mode="after")
    def _shape(self) -> "Contrast":
        wanted = {"one-sample": (1, 1), "paired": (2, 2), "two-sample": (1, 1), "correlation": (1, 1), "repeated-measures": (3, 99)}
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


class _Correction(SpecModel):
    name: str | None = Field(default=None, description="Name of this correction's result folder; defaults to the method.")

    @field_validator("name")
    @classmethod
    def _name(cls, value):
        return value if value is None else _check_name(value, "correction name")

    @property
    def label(self) -> str:
        """The result folder name."""
        return self.name or self.method


class PValueCorrection(_Correction):
    """A p-value procedure applied point by point."""

    method: PValueMethod = Field(description="bonferroni, sidak, holm (step-down), hochberg (step-up), fdr-bh (Benjamini-Hochberg) or fdr-by (Benjamini-Yekutieli).")
    level: float | None = Field(default=None, gt=0, lt=1, description="alpha (FWER methods) or q (FDR methods) for this correction; defaults to inference.alpha.")
    pvalues: Literal["parametric", "permutation"] = Field(default="parametric", description="Input p-values: from the test's distribution or from the permutation null.")

    @property
    def needs_null(self) -> bool:
        return self.pvalues == "permutation"


class MaxStatCorrection(_Correction):
    """Max-statistic inference from the permutation null."""

    method: Literal["max-stat"] = Field(description="Max-statistic (Westfall & Young 1993).")
    step_down: bool = Field(default=False, description="Step-down (successive maxima) instead of single-step.")

    @property
    def needs_null(self) -> bool:
        return True


class ClusterCorrection(_Correction):
    """Cluster-based permutation inference."""

    method: Literal["cluster"] = Field(description="Cluster-based permutation (Maris & Oostenveld 2007).")
    forming_p: float | None = Field(default=None, gt=0, lt=1, description="Cluster-forming threshold as a p-value of the test's own distribution (two-sided: halved per tail). Default 0.01 unless forming_stat is given.")
    forming_stat: float | None = Field(default=None, gt=0, description="Cluster-forming threshold as a statistic value.")
    cluster_stat: Literal["mass", "size"] = Field(default="mass", description="Cluster statistic: mass (sum of |stat|) or size (number of points).")
    dims: list[Dimension] = Field(default_factory=lambda: ["channel", "freq", "time"], min_length=1, description="Dimensions clusters extend over.")
    min_neighbor_channels: int = Field(default=0, ge=0, description="Fewest supra-threshold neighbor channels a point needs to join a cluster.")

    @property
    def needs_null(self) -> bool:
        return True

    @model_validator(mode="after")
    def _one_threshold(self) -> "ClusterCorrection":
        if self.forming_p is not None and self.forming_stat is not None:
            raise LocatedError(("forming_stat",), "give either forming_p or forming_stat, not both")
        return self

    @property
    def forming(self) -> dict:
        """The forming threshold as given (forming_p defaults to 0.01)."""
        if self.forming_stat is not None:
            return {"forming_stat": self.forming_stat}
        return {"forming_p": self.forming_p if self.forming_p is not None else 0.01}


class TFCECorrection(_Correction):
    """Threshold-free cluster enhancement (Smith & Nichols 2009)."""

    method: Literal["tfce"] = Field(description="Threshold-free cluster enhancement.")
    E: float = Field(default=0.5, gt=0, description="Extent exponent.")
    H: float = Field(default=2.0, gt=0, description="Height exponent.")
    step: float | None = Field(default=None, gt=0, description="Fixed integration step in statistic units; omit for the exact integral.")
    dims: list[Dimension] = Field(default_factory=lambda: ["channel", "freq", "time"], min_length=1, description="Dimensions clusters extend over.")

    @property
    def needs_null(self) -> bool:
        return True


Correction = Annotated[
    Union[PValueCorrection, MaxStatCorrection, ClusterCorrection, TFCECorrection],
    Field(discriminator="method"),
]


class Inference(SpecModel):
    """Statistics, resampling and corrections."""

    alpha: float = Field(default=0.05, gt=0, lt=1, description="Significance level (FWER methods) and default FDR level q.")
    tail: Tail = Field(default="two-sided", description="'two-sided', 'greater' or 'less'.")
    statistic: StatisticName = Field(default="t", description="'t' or 'yuen' (trimmed-mean t, Yuen 1974) for one-sample, paired and two-sample tests.")
    trim: float = Field(default=0.2, ge=0, lt=0.5, description="Trimming proportion of the Yuen statistic.")
    equal_var: bool = Field(default=True, description="Two-sample: Student's t (true) or Welch's t (false).")
    permutations: int = Field(default=1000, ge=1, description="Number of random permutations; all of them (exact test) when fewer distinct ones exist.")
    shards: int = Field(default=1, ge=1, description="Number of pieces the permutations are split into (one job each); results do not depend on it.")
    family: Family = Field(default="per-contrast", description="'per-contrast', or 'all-contrasts' to correct over every contrast of the study together.")
    corrections: list[Correction] = Field(min_length=1, description="Corrections to apply, each with its own settings and an optional name.")

    @model_validator(mode="after")
    def _unique_names(self) -> "Inference":
        seen = {}
        for index, correction in enumerate(self.corrections):
            if correction.label in seen:
                raise LocatedError(
                    ("corrections", index, "name"),
                    f"two corrections are named '{correction.label}' (also corrections[{seen[correction.label]}]); give one a name",
                )
            seen[correction.label] = index
        return self

    @property
    def needs_null(self) -> bool:
        """Whether any correction uses the permutation null."""
        return any(c.needs_null for c in self.corrections)


class Study(SpecModel):
    """A famwise study spec (version 1)."""

    version: Literal[1] = Field(description="Spec format version; always 1.")
    name: str = Field(description="Study name (shown in the report).")
    output: str = Field(default="results", description="Output folder, relative to the spec's folder.")
    seed: int = Field(default=1, ge=0, description="Seed of the permutation table; the same seed gives the same masks.")
    subjects: Subjects = Field(description="Subject inputs.")
    conditions: dict[str, list[str]] = Field(min_length=1, description="Condition name -> event labels pooled into it.")
    epochs: EpochWindow = Field(default_factory=EpochWindow, description="Epoching of continuous recordings (BIDS input).")
    timefreq: Timefreq = Field(default_factory=Timefreq, description="Time-frequency decomposition (epochs and BIDS input).")
    analysis: Analysis = Field(default_factory=Analysis, description="A-priori restriction of time, frequency and channels.")
    channels: Channels = Field(default_factory=Channels, description="Electrode positions and neighbor graph (cluster and TFCE corrections).")
    contrasts: list[Contrast] = Field(min_length=1, description="Group-level contrasts.")
    inference: Inference = Field(description="Statistics, resampling and corrections.")
    power: PowerSettings | None = Field(default=None, description="Sample-size planning by simulation from this study's maps (`famwise power`); omit when not planning.")

    @field_validator("output")
    @classmethod
    def _output_inside(cls, value):
        return _check_relative(value)

    @field_validator("conditions")
    @classmethod
    def _condition_names(cls, value):
        for name, labels in value.items():
            _check_name(name, "condition name")
            if not labels:
                raise ValueError(f"condition '{name}' lists no event labels")
        return value

    @model_validator(mode="after")
    def _contrasts_refer_to_known_things(self) -> "Study":
        known = list(self.conditions)
        names = {}
        for index, contrast in enumerate(self.contrasts):
            if contrast.name in names:
                raise LocatedError(("contrasts", index, "name"), f"duplicate contrast name '{contrast.name}' (also contrasts[{names[contrast.name]}])")
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
                raise LocatedError(("subjects", "exclude", subject), f"subject id {subject!r} is not a plain identifier (letters and digits only)")
            if ids is not None and subject not in ids:
                raise LocatedError(("subjects", "exclude", subject), f"excluded subject '{subject}' is not in subjects.ids")
        if self.subjects.groups is not None:
            for subject in self.subjects.groups:
                if not IDENTIFIER.match(subject):
                    raise LocatedError(("subjects", "groups", subject), f"subject id {subject!r} is not a plain identifier (letters and digits only)")
        return self

    @model_validator(mode="after")
    def _analysis_inside_grid(self) -> "Study":
        band = self.analysis.freq_hz
        grid = self.timefreq.freqs_hz
        if band is not None and self.subjects.source != "timefreq":
            if band[1] < grid.start_hz or band[0] > grid.stop_hz:
                raise LocatedError(
                    ("analysis", "freq_hz"),
                    f"band [{band[0]}, {band[1]}] Hz lies outside the decomposed frequencies [{grid.start_hz}, {grid.stop_hz}] Hz",
                )
        return self


def did_you_mean(value: str, choices) -> str:
    """' (did you mean 'x'?)' for a near miss, else ''."""
    import difflib

    close = difflib.get_close_matches(str(value), [str(c) for c in choices], n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
