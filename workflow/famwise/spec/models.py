"""The study spec: one pydantic model tree, the single source of truth.

Choice types first, then one model per concern, then the root ``Study``;
the decomposition section's models live in ``famwise.spec.decomposition``,
the inference section's in ``famwise.spec.inference``, the regions in
``famwise.spec.region``, the building blocks in ``famwise.spec.base``.
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
from famwise.spec.contrast_design import check_contrast_design
from famwise.spec.decomposition import Baseline, Decomposition, FrequencyGrid  # noqa: F401  (re-exported)
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
from famwise.spec.report_options import ReportOptions, check_report_options

SubjectSource = Literal["epochs", "maps", "bids"]
TestName = Literal[
    "one-sample", "paired", "weighted", "two-sample", "between-groups", "repeated-measures", "correlation", "regression"
]


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
    covariates: dict[str, dict[str, float | str | None]] | None = Field(
        default=None,
        description="Per-subject covariates (covariate name -> id -> value), for correlation and regression "
        "contrasts: numbers, or text for a categorical covariate (e.g. sex, site; coded as indicator columns, "
        "the first level in sorted order the reference). With 'bids', omit to read the columns of participants.tsv.",
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
        description="'one-sample', 'paired' (first minus second condition), 'weighted' (each subject's weighted sum of "
        "conditions, tested against zero), 'two-sample' (first minus second group), 'between-groups' (F over 3+ groups), "
        "'repeated-measures' (F over 3+ conditions), 'correlation' (with a covariate) or 'regression' (the covariate's "
        "coefficient with the nuisance covariates in the model, Freedman-Lane permutations)."
    )
    conditions: list[str] = Field(
        min_length=1,
        description="Conditions compared: one (one-sample, two-sample, between-groups, correlation, regression), two "
        "(paired; two-sample, between-groups and regression: each subject's first minus second, for two-sample the "
        "group x condition interaction), any number with weights (weighted, two-sample, between-groups, regression) "
        "or three or more (repeated-measures).",
    )
    weights: list[float] | None = Field(
        default=None,
        description="One weight per condition (weighted, two-sample, between-groups, regression): each subject's value "
        "is the weighted sum of its condition maps, e.g. [1, -1, -1, 1] for the interaction of a 2x2 within-subject "
        "design. Weights over two or more conditions must sum to zero.",
    )
    groups: list[str] | None = Field(
        default=None,
        description="Two groups for 'two-sample' (first minus second); three or more for 'between-groups'.",
    )
    covariate: str | None = Field(
        default=None, description="Covariate name for 'correlation'; the tested covariate of 'regression'."
    )
    nuisance: list[str] | None = Field(
        default=None,
        description="'regression' only: covariates in the model besides the tested one (e.g. [sex, site]), "
        "whose effects are removed; omit for none.",
    )

    @field_validator("name")
    @classmethod
    def _name(cls, value):
        return check_name(value, "contrast name")

    @model_validator(mode="after")
    def _shape(self) -> "Contrast":
        wanted = {
            "one-sample": (1, 1),
            "paired": (2, 2),
            "weighted": (1, 99),
            "two-sample": (1, 99),
            "between-groups": (1, 99),
            "correlation": (1, 1),
            "regression": (1, 99),
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
        elif self.groups is not None and self.test != "between-groups":
            raise LocatedError(
                ("groups",), f"groups are only used by 'two-sample' and 'between-groups', not '{self.test}'"
            )
        if self.test in ("correlation", "regression") and not self.covariate:
            raise LocatedError(("covariate",), f"test '{self.test}' needs a covariate")
        if self.test not in ("correlation", "regression") and self.covariate is not None:
            raise LocatedError(
                ("covariate",), f"covariate is only used by 'correlation' and 'regression', not '{self.test}'"
            )
        if self.nuisance is not None:
            if self.test != "regression":
                raise LocatedError(
                    ("nuisance",), f"nuisance covariates are only used by 'regression', not '{self.test}'"
                )
            if self.covariate in self.nuisance:
                raise LocatedError(
                    ("nuisance",), f"'{self.covariate}' is the tested covariate; it cannot be a nuisance too"
                )
            if len(set(self.nuisance)) != len(self.nuisance):
                raise LocatedError(("nuisance",), "a nuisance covariate is listed twice")
        check_contrast_design(self)
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
    report: ReportOptions | None = Field(
        default=None, description="What the report draws (never what is tested); omit for the defaults."
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
                for key, name in [
                    ("covariate", contrast.covariate),
                    *(("nuisance", n) for n in contrast.nuisance or []),
                ]:
                    if name not in present:
                        raise LocatedError(
                            ("contrasts", index, key),
                            f"unknown covariate '{name}' (known: {', '.join(present)}){did_you_mean(name, present)}",
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
    def _no_frequency_for_voltage(self) -> "Study":
        """Voltage maps (decomposition.method 'none') have no frequency axis to restrict."""
        if self.decomposition.method != "none":
            return self
        message = "voltage maps (decomposition.method 'none') have no frequency axis; leave freq_hz out"
        if self.analysis.freq_hz is not None:
            raise LocatedError(("analysis", "freq_hz"), message)
        for index, region in enumerate(self.planned_regions):
            if region.freq_hz is not None:
                raise LocatedError(("planned_regions", index, "freq_hz"), message)
        if self.power is not None and self.power.effect.freq_hz is not None:
            raise LocatedError(("power", "effect", "freq_hz"), message)
        return self

    @model_validator(mode="after")
    def _power_contrasts_known(self) -> "Study":
        check_power_contrasts(self.power, [c.name for c in self.contrasts])
        return self

    @model_validator(mode="after")
    def _report_fits_the_study(self) -> "Study":
        check_report_options(self.report, voltage=self.decomposition.method == "none", analysed=self.analysis.channels)
        return self
