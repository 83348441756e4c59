"""Settings of the power simulation (kept light: the Snakefile imports this module).

One shard's settings name only what its simulated studies depend on (the
contrast, one effect level, one sample size, the statistic, null and
correction settings), so adding a sample size or an effect level leaves
every finished shard valid.
"""

from dataclasses import replace

from famwise import layout
from famwise.errors import UserError
from famwise.settings import PowerEffectSettings, PowerShardSettings, PowerTableSettings


def power_spec(plan, *, sizes: list[int] | None = None, studies: int | None = None):
    """The spec's ``power`` section with the command line's overrides applied (UserError when absent)."""
    spec = plan.study.power
    if spec is None:
        raise UserError(
            f"{plan.loaded.path.name}: no 'power' section; add one (see the README's spec reference) "
            "to say which effect to simulate"
        )
    changes = {}
    if sizes:
        if any(int(n) != n or n < 4 for n in sizes):
            raise UserError(f"--sizes: every sample size must be a whole number of at least 4, got {sizes}")
        changes["sample_sizes"] = sorted({int(n) for n in sizes})
    if studies is not None:
        if studies < spec.shards:
            raise UserError(f"--studies must be at least power.shards ({spec.shards}), got {studies}")
        changes["studies"] = int(studies)
    return spec.model_copy(update=changes) if changes else spec


def power_contrasts(plan, spec) -> list[str]:
    """Contrasts the simulation covers (the spec model has checked the names)."""
    return list(spec.contrasts or [c.name for c in plan.study.contrasts])


def effect_levels(spec) -> dict[str, float]:
    """Effect tag (a folder name) -> size: ``pilot-x<factor>`` or ``d-<size>``."""
    effect = spec.effect
    if effect.source == "pilot":
        return {f"pilot-x{factor:g}": float(factor) for factor in effect.scale}
    return {f"d-{size:g}": float(size) for size in effect.d}


def power_shard_settings(plan, spec, contrast: str, effect: str, size: int) -> PowerShardSettings:
    """Settings of the shards of one contrast, effect level (its tag) and sample size.

    Parameters
    ----------
    plan : famwise.plan.Plan
    spec : famwise.spec.power.PowerSettings
        From :func:`power_spec`.
    contrast, effect : str
        Contrast name and effect tag (a key of :func:`effect_levels`).
    size : int
        Participants per simulated study.
    """
    inference = plan.study.inference
    levels = effect_levels(spec)
    if effect not in levels:
        raise UserError(f"power: unknown effect level '{effect}' (known: {', '.join(levels)})")
    region = spec.effect
    nulls = plan.null_settings()
    return PowerShardSettings(
        contrast=contrast,
        effect=PowerEffectSettings(
            tag=effect,
            source=region.source,
            size=levels[effect],
            channels=None if region.channels is None else tuple(region.channels),
            freq_hz=None if region.freq_hz is None else tuple(region.freq_hz),
            time_ms=None if region.time_ms is None else tuple(region.time_ms),
        ),
        n=int(size),
        studies=spec.studies,
        shards=spec.shards,
        study_permutations=inference.permutations,
        alpha=inference.alpha,
        observed=plan.observed_settings(),
        nulls=replace(nulls, permutations=int(spec.permutations or inference.permutations)),
        corrections=tuple(plan.correction_settings(c.label) for c in inference.corrections),
    )


def power_table_settings(plan, spec, contrast: str) -> PowerTableSettings:
    """Settings of one contrast's power table: every effect level's and sample size's shard settings."""
    return PowerTableSettings(
        contrast=contrast,
        target=spec.target,
        levels=tuple(
            power_shard_settings(plan, spec, contrast, effect, n)
            for effect in effect_levels(spec)
            for n in spec.sample_sizes
        ),
    )


def shard_files(spec, contrast: str) -> list[str]:
    """Every shard file of a contrast (relative to the output folder)."""
    return [
        layout.power_shard(contrast, effect, n, k)
        for effect in effect_levels(spec)
        for n in spec.sample_sizes
        for k in range(spec.shards)
    ]
