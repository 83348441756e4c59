"""Spec models of the inference section: statistic, resampling and the corrections."""

from typing import Annotated, Literal

from pydantic import Field, field_validator, model_validator

from famwise.spec.base import LocatedError, SpecModel, check_name

Tail = Literal["two-sided", "greater", "less"]
StatisticName = Literal["t", "yuen"]
Family = Literal["per-contrast", "all-contrasts"]
PValueMethod = Literal["bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by"]
Dimension = Literal["channel", "freq", "time"]


class _Correction(SpecModel):
    name: str | None = Field(
        default=None, description="Name of this correction's result folder; defaults to the method."
    )

    @field_validator("name")
    @classmethod
    def _name(cls, value):
        return value if value is None else check_name(value, "correction name")

    @property
    def label(self) -> str:
        """The result folder name."""
        return self.name or self.method


class PValueCorrection(_Correction):
    """A p-value procedure applied point by point."""

    method: PValueMethod = Field(
        description="bonferroni, sidak, holm (step-down), hochberg (step-up), fdr-bh (Benjamini-Hochberg) or fdr-by (Benjamini-Yekutieli)."
    )
    level: float | None = Field(
        default=None,
        gt=0,
        lt=1,
        description="alpha (FWER methods) or q (FDR methods) for this correction; defaults to inference.alpha.",
    )
    pvalues: Literal["parametric", "permutation"] = Field(
        default="parametric", description="Input p-values: from the test's distribution or from the permutation null."
    )

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
    forming_p: float | None = Field(
        default=0.01,
        gt=0,
        lt=1,
        description="Cluster-forming threshold as a p-value of the test's own distribution (two-sided: halved per tail). The default applies when forming_stat is not given.",
    )
    forming_stat: float | None = Field(
        default=None, gt=0, description="Cluster-forming threshold as a statistic value."
    )
    cluster_stat: Literal["mass", "size"] = Field(
        default="mass", description="Cluster statistic: mass (sum of |stat|) or size (number of points)."
    )
    dims: list[Dimension] = Field(
        default_factory=lambda: ["channel", "freq", "time"],
        min_length=1,
        description="Dimensions clusters extend over.",
    )
    min_supra_neighbors: int = Field(
        default=0, ge=0, description="Fewest supra-threshold neighbor channels a point needs to join a cluster."
    )

    @property
    def needs_null(self) -> bool:
        return True

    @model_validator(mode="before")
    @classmethod
    def _forming_p_default_only_without_stat(cls, data):
        """The forming_p default does not apply when the threshold is given as a statistic."""
        if isinstance(data, dict) and "forming_p" not in data and data.get("forming_stat") is not None:
            return {**data, "forming_p": None}
        return data

    @model_validator(mode="after")
    def _one_threshold(self) -> "ClusterCorrection":
        if self.forming_p is not None and self.forming_stat is not None:
            raise LocatedError(("forming_stat",), "give either forming_p or forming_stat, not both")
        return self


class TFCECorrection(_Correction):
    """Threshold-free cluster enhancement (Smith & Nichols 2009)."""

    method: Literal["tfce"] = Field(description="Threshold-free cluster enhancement.")
    E: float = Field(default=0.5, gt=0, description="Extent exponent.")
    H: float = Field(default=2.0, gt=0, description="Height exponent.")
    step: float | None = Field(
        default=None, gt=0, description="Fixed integration step in statistic units; omit for the exact integral."
    )
    dims: list[Dimension] = Field(
        default_factory=lambda: ["channel", "freq", "time"],
        min_length=1,
        description="Dimensions clusters extend over.",
    )

    @property
    def needs_null(self) -> bool:
        return True


Correction = Annotated[
    PValueCorrection | MaxStatCorrection | ClusterCorrection | TFCECorrection,
    Field(discriminator="method"),
]


class Inference(SpecModel):
    """Statistics, resampling and corrections."""

    alpha: float = Field(
        default=0.05, gt=0, lt=1, description="Significance level (FWER methods) and default FDR level q."
    )
    tail: Tail = Field(default="two-sided", description="'two-sided', 'greater' or 'less'.")
    statistic: StatisticName = Field(
        default="t",
        description="'t' or 'yuen' (trimmed-mean t, Yuen 1974) for one-sample, paired, weighted and two-sample tests.",
    )
    trim: float = Field(default=0.2, ge=0, lt=0.5, description="Trimming proportion of the Yuen statistic.")
    equal_var: bool = Field(default=True, description="Two-sample: Student's t (true) or Welch's t (false).")
    permutations: int = Field(
        default=1000,
        ge=1,
        description="Number of random permutations; all of them (exact test) when fewer distinct ones exist.",
    )
    shards: int = Field(
        default=1,
        ge=1,
        description="Number of pieces the permutations are split into (one job each); results do not depend on it.",
    )
    degenerate_points: Literal["stop", "leave-out"] = Field(
        default="stop",
        description="Points where the statistic is undefined (NaN or inf in a subject's value, or a variance that is "
        "zero or below (1e-6 x the largest |value| of the map)^2): 'stop' ends the run with a message naming them; "
        "'leave-out' removes them from the family (not counted, never significant, marked in the figures).",
    )
    family: Family = Field(
        default="per-contrast",
        description="'per-contrast', or 'all-contrasts' to correct over every contrast of the study together.",
    )
    corrections: list[Correction] = Field(
        min_length=1, description="Corrections to apply, each with its own settings and an optional name."
    )

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
