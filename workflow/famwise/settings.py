"""The settings type of every stage: frozen dataclasses built once by the plan.

The plan (``famwise.plan``) is the only reader of the spec model; it resolves
each stage's settings from the validated spec (every default is already
resolved in the model's fields) and hands them to Snakemake as deterministic
JSON text (``famwise.settings_codec``). The job (``famwise.jobs``) turns the
text back into the same type and calls the stage. A setting keeps its spec
name here and in the stage.

This module is light on purpose: the Snakefile imports it through the plan.
"""

from dataclasses import dataclass
from typing import Literal

from famwise.settings_codec import to_plain

# ---- decomposition (famwise.decomposition via the decompose job) --------------------


@dataclass(frozen=True)
class FrequencyGridSettings:
    """``decomposition.frequencies`` of the spec."""

    lowest_hz: float
    highest_hz: float
    count: int
    spacing: str


@dataclass(frozen=True)
class BaselineSettings:
    """``decomposition.baseline`` of the spec."""

    mode: str
    window_ms: tuple[float, float] | None
    pooled: bool
    single_epoch: bool


@dataclass(frozen=True)
class DecompositionSettings:
    """``decomposition`` of the spec (Morlet width resolved: ``cycles`` is 7 unless given otherwise).

    ``method`` ``"none"`` makes voltage maps (``famwise.decomposition.voltage``): ``measure`` ``"voltage"``;
    ``lowpass_hz``, ``time_step_ms``, ``average`` and the baseline apply, the grid and the widths do not.
    """

    method: str
    frequencies: FrequencyGridSettings
    cycles: float | tuple[float, float] | None
    fwhm_ms: float | tuple[float, float] | None
    taper_length_ms: float | None
    nw: float | None
    measure: str
    time_step_ms: float | None
    lowpass_hz: float | None
    average: str
    trim: float
    baseline: BaselineSettings


@dataclass(frozen=True)
class EpochSettings:
    """``epochs`` of the spec (cutting epochs from BIDS recordings)."""

    window_ms: tuple[float, float]
    reject_peak_to_peak_uv: float | None
    reference: str


@dataclass(frozen=True)
class DecomposeSettings:
    """One subject's input -> ``tf/sub-<id>.npz``: where the input is and how it is decomposed.

    ``path`` is absolute: a file pattern with ``{subject}``, or the BIDS root.
    ``conditions`` maps each condition to the event labels pooled into it.
    """

    source: str
    path: str
    task: str | None
    min_epochs: int
    conditions: dict[str, tuple[str, ...]]
    epochs: EpochSettings
    decomposition: DecompositionSettings


@dataclass(frozen=True)
class SubjectsTableSettings:
    """Per-subject sidecars -> ``subjects.tsv``."""

    found: tuple[str, ...]
    exclude: dict[str, str]
    groups: dict[str, str]
    conditions: tuple[str, ...]


# ---- channel graph ----------------------------------------------------------------


@dataclass(frozen=True)
class NeighborsSettings:
    """``channels.neighbors`` of the spec (``edges_file`` absolute)."""

    method: str
    max_distance_mm: float | None
    edges_file: str | None


@dataclass(frozen=True)
class GraphSettings:
    """Channel names + positions -> ``channels/graph.npz``.

    ``positions`` is an electrode system ("10-10", "10-20"), ``"bids"`` or an absolute TSV path.
    """

    positions: str
    neighbors: NeighborsSettings
    analysis_channels: tuple[str, ...] | None
    bids_root: str | None
    task: str | None


# ---- contrast data and observed statistics -----------------------------------------


@dataclass(frozen=True)
class AnalysisSettings:
    """``analysis`` of the spec: the a-priori region (ms, Hz, channel names)."""

    time_ms: tuple[float, float] | None
    freq_hz: tuple[float, float] | None
    channels: tuple[str, ...] | None


@dataclass(frozen=True)
class ContrastSettings:
    """Subjects' maps -> ``contrasts/<c>/subjects.npz``.

    ``groups`` is each subject's group index (two-sample, between-groups: 0 =
    first group), ``covariate`` each subject's value (correlation; regression:
    the tested covariate, coded); None otherwise. ``weights`` are the spec's
    condition weights (None: first minus second for two conditions, the
    condition itself for one). Regression only: ``nuisance`` each subject's
    nuisance columns, ``nuisance_columns`` their names and ``design_terms``
    how each covariate was coded (`famwise.stats.coding`).
    """

    name: str
    test: str
    conditions: tuple[str, ...]
    subjects: tuple[str, ...]
    analysis: AnalysisSettings
    groups: tuple[int, ...] | None
    covariate: tuple[float, ...] | None
    nuisance: tuple[tuple[float, ...], ...] | None = None
    nuisance_columns: tuple[str, ...] | None = None
    design_terms: tuple[str, ...] | None = None
    weights: tuple[float, ...] | None = None


@dataclass(frozen=True)
class FormingSettings:
    """The cluster-forming threshold of one cluster correction, as the spec gives it.

    Exactly one of ``forming_p`` (a p-value of the test's own distribution)
    and ``forming_stat`` (a statistic value) is set.
    """

    label: str
    forming_p: float | None
    forming_stat: float | None


@dataclass(frozen=True)
class ObservedSettings:
    """Contrast data -> ``contrasts/<c>/observed.npz``.

    The observed stage also derives each cluster correction's forming
    threshold (``forming``) once and stores it as ``forming_threshold.<label>``.
    """

    statistic: str
    trim: float
    equal_var: bool
    tail: str
    forming: tuple[FormingSettings, ...]
    degenerate_points: str = "stop"


# ---- permutation nulls ------------------------------------------------------------


@dataclass(frozen=True)
class ExceedanceNullSettings:
    """Per-point exceedance counts (permutation p-values)."""

    key: str
    kind: Literal["exceed"] = "exceed"


@dataclass(frozen=True)
class MaxStatNullSettings:
    """Per-permutation maxima of |stat| (single-step max-statistic)."""

    key: str
    kind: Literal["maxstat"] = "maxstat"


@dataclass(frozen=True)
class StepDownNullSettings:
    """Maxima plus successive-maxima counts (step-down max-statistic)."""

    key: str
    kind: Literal["stepdown"] = "stepdown"


@dataclass(frozen=True)
class ClusterNullSettings:
    """Largest cluster statistic per permutation (threshold read from observed.npz)."""

    key: str
    cluster_stat: str
    dims: tuple[str, ...]
    min_supra_neighbors: int
    kind: Literal["cluster"] = "cluster"


@dataclass(frozen=True)
class TFCENullSettings:
    """Largest |TFCE| per permutation."""

    key: str
    E: float
    H: float
    step: float | None
    dims: tuple[str, ...]
    kind: Literal["tfce"] = "tfce"


CollectorSettings = (
    ExceedanceNullSettings | MaxStatNullSettings | StepDownNullSettings | ClusterNullSettings | TFCENullSettings
)


@dataclass(frozen=True)
class NullSettings:
    """Contrast data + observed -> ``contrasts/<c>/nulls/shard-<k>.npz`` and ``nulls/info.json``."""

    seed: int
    permutations: int
    shards: int
    family: str
    statistic: str
    trim: float
    equal_var: bool
    tail: str
    collectors: tuple[CollectorSettings, ...]


# ---- corrections ------------------------------------------------------------------


@dataclass(frozen=True)
class CorrectionEntry:
    """One entry of ``inference.corrections`` (defaults resolved; unused keys None).

    ``label`` is the result folder (the entry's name, else its method).
    """

    label: str
    method: str
    name: str | None = None
    level: float | None = None
    pvalues: str | None = None
    step_down: bool | None = None
    forming_p: float | None = None
    forming_stat: float | None = None
    cluster_stat: str | None = None
    dims: tuple[str, ...] | None = None
    min_supra_neighbors: int | None = None
    E: float | None = None
    H: float | None = None
    step: float | None = None


@dataclass(frozen=True)
class CorrectionSettings:
    """Observed (+ null shards) -> ``contrasts/<c>/<label>/result.npz`` (+ clusters.tsv).

    ``contrasts`` lists every contrast of the study in spec order (the
    family's order for ``family: all-contrasts``).
    """

    correction: CorrectionEntry
    alpha: float
    tail: str
    family: str
    contrasts: tuple[str, ...]

    def record(self) -> dict:
        """The settings as stored with the result (plain JSON values; the entry without the keys its method leaves unset)."""
        plain = to_plain(self)
        plain["correction"] = {
            key: value for key, value in plain["correction"].items() if value is not None or key == "name"
        }
        return plain


# ---- report and calibration ---------------------------------------------------------


@dataclass(frozen=True)
class StudyRecordSettings:
    """The validated spec (``model_dump(mode="json")``) -> ``study.json``, which the report reads."""

    study: dict


@dataclass(frozen=True)
class ReportSettings:
    """Every result -> ``report/``: the spec's path (its text is shown) and the study's input files
    (hashed in the provenance record), by the name the spec gives each."""

    spec: str
    input_files: dict[str, str]


@dataclass(frozen=True)
class PlannedRegionSettings:
    """One of the spec's ``planned_regions``: channels, a band [low, high] in Hz (None: all), a window [start, end] in ms."""

    name: str
    channels: tuple[str, ...]
    freq_hz: tuple[float, float] | None
    time_ms: tuple[float, float]


@dataclass(frozen=True)
class SubjectValuesSettings:
    """One contrast's maps (+ a correction's clusters) -> ``subject_values.tsv`` or ``planned_values.tsv``.

    ``group_names`` are the two-sample or between-groups groups in index
    order, ``covariate_name`` the correlation's covariate; None otherwise.
    ``weights`` as in `ContrastSettings`.
    """

    test: str
    conditions: tuple[str, ...]
    group_names: tuple[str, ...] | None
    covariate_name: str | None
    regions: tuple[PlannedRegionSettings, ...]
    weights: tuple[float, ...] | None = None


@dataclass(frozen=True)
class CalibrationSettings:
    """Null datasets of one contrast -> ``calibration/<c>/shard-<k>.npz`` -> ``calibration/<c>.tsv``.

    ``nulls`` is the study's null settings with ``permutations`` as asked
    for the calibration (``study_permutations`` keeps the study's number).
    """

    contrast: str
    datasets: int
    shards: int
    study_permutations: int
    alpha: float
    observed: ObservedSettings
    nulls: NullSettings
    corrections: tuple[CorrectionSettings, ...]


# ---- power (famwise power) ------------------------------------------------------------


@dataclass(frozen=True)
class PowerEffectSettings:
    """One effect level of ``power.effect``: its folder tag, its size and its region.

    ``size`` is the factor on the pilot's observed effect (``source`` "pilot")
    or the standardised size d, Pearson's r for correlation ("specified").
    The region's parts are None where the spec leaves them out (all points).
    """

    tag: str
    source: str
    size: float
    channels: tuple[str, ...] | None
    freq_hz: tuple[float, float] | None
    time_ms: tuple[float, float] | None


@dataclass(frozen=True)
class PowerShardSettings:
    """Simulated studies of one contrast, effect level and sample size -> ``power/<c>/<effect>/n<N>/shard-<k>.npz``.

    ``nulls`` is the study's null settings with ``permutations`` as asked for
    the simulation (``study_permutations`` keeps the study's number); each
    simulated study draws its own table from it.
    """

    contrast: str
    effect: PowerEffectSettings
    n: int
    studies: int
    shards: int
    study_permutations: int
    alpha: float
    observed: ObservedSettings
    nulls: NullSettings
    corrections: tuple[CorrectionSettings, ...]


@dataclass(frozen=True)
class PowerTableSettings:
    """Every shard of one contrast -> ``power/<c>.tsv`` (+ .json, .png, .svg, .md).

    ``levels`` holds the shard settings of each effect level and sample size,
    effect levels in spec order, sizes ascending within each.
    """

    contrast: str
    target: float
    levels: tuple[PowerShardSettings, ...]
