"""Settings of one contrast's calibration (kept light: the Snakefile imports this module)."""

import json

from famwise.errors import UserError

UNCORRECTED = "uncorrected"
"""Label of the reference row: parametric p <= alpha at any point, no correction."""


def calibration_settings(plan, contrast: str, *, datasets: int, permutations: int | None, chunks: int) -> str:
    """Settings of one contrast's calibration as JSON text (the Snakemake params).

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
    chunks : int
        Number of chunk files the datasets are split into (1 <= chunks <= N).
    """
    inference = plan.study.inference
    if int(datasets) != datasets or datasets < 1:
        raise UserError(f"--datasets must be a whole number of at least 1, got {datasets}")
    if permutations is not None and (int(permutations) != permutations or permutations < 1):
        raise UserError(f"--permutations must be a whole number of at least 1, got {permutations}")
    if int(chunks) != chunks or not 1 <= chunks <= datasets:
        raise UserError(f"--chunks must be between 1 and the number of datasets ({datasets}), got {chunks}")
    settings = {
        "contrast": contrast,
        "seed": plan.study.seed,
        "datasets": int(datasets),
        "chunks": int(chunks),
        "permutations": int(permutations if permutations is not None else inference.permutations),
        "study_permutations": inference.permutations,
        "alpha": inference.alpha,
        "collectors": plan.null_collectors() if inference.needs_null else [],
        "corrections": [json.loads(plan.correction_settings(c.label)) for c in inference.corrections],
        **plan.statistic_settings(),
    }
    return json.dumps(settings, sort_keys=True, separators=(",", ":"))
