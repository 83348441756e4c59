"""Settings of one contrast's calibration (kept light: the Snakefile imports this module)."""

from dataclasses import replace

from famwise.errors import UserError
from famwise.settings import CalibrationSettings

UNCORRECTED = "uncorrected"
"""Label of the reference row: parametric p <= alpha at any point, no correction."""


def calibration_settings(
    plan, contrast: str, *, datasets: int, permutations: int | None, shards: int
) -> CalibrationSettings:
    """Settings of one contrast's calibration (the rules pass them as JSON text).

    Parameters
    ----------
    plan : famwise.plan.Plan
    contrast : str
        Contrast name.
    datasets : int
        Number of null datasets N.
    permutations : int or None
        Random permutations per dataset; None keeps the study's
        ``inference.permutations``.
    shards : int
        Number of shard files the datasets are split into (1 <= shards <= N).
    """
    inference = plan.study.inference
    if int(datasets) != datasets or datasets < 1:
        raise UserError(f"--datasets must be a whole number of at least 1, got {datasets}")
    if permutations is not None and (int(permutations) != permutations or permutations < 1):
        raise UserError(f"--permutations must be a whole number of at least 1, got {permutations}")
    if int(shards) != shards or not 1 <= shards <= datasets:
        raise UserError(f"--shards must be between 1 and the number of datasets ({datasets}), got {shards}")
    nulls = replace(
        plan.null_settings(), permutations=int(permutations if permutations is not None else inference.permutations)
    )
    return CalibrationSettings(
        contrast=contrast,
        datasets=int(datasets),
        shards=int(shards),
        study_permutations=inference.permutations,
        alpha=inference.alpha,
        observed=plan.observed_settings(),
        nulls=nulls,
        corrections=tuple(plan.correction_settings(c.label) for c in inference.corrections),
    )
