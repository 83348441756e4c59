"""Settings of the power simulation (kept light: the Snakefile imports this module).

One chunk's settings name only what its simulated studies depend on (the
contrast, one effect level, one sample size, the correction settings), so
adding a sample size or an effect level leaves every finished chunk valid.
"""

import json

from famwise.errors import UserError


def _json(value) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"))


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
        if studies < spec.chunks:
            raise UserError(f"--studies must be at least power.chunks ({spec.chunks}), got {studies}")
        changes["studies"] = int(studies)
    return spec.model_copy(update=changes) if changes else spec


def power_contrasts(plan, spec) -> list[str]:
    """Contrasts the simulation covers (UserError for an unknown name)."""
    names = [c.name for c in plan.study.contrasts]
    for name in spec.contrasts or []:
        if name not in names:
            raise UserError(
                f"{plan.loaded.path.name} power.contrasts: unknown contrast '{name}' (known: {', '.join(names)})"
            )
    return list(spec.contrasts or names)


def effect_levels(spec) -> dict[str, float]:
    """Effect tag (a folder name) -> size: ``pilot-x<factor>`` or ``d-<size>``."""
    effect = spec.effect
    if effect.source == "pilot":
        return {f"pilot-x{factor:g}": float(factor) for factor in effect.scale}
    return {f"d-{size:g}": float(size) for size in effect.d}


def chunk_settings(plan, spec, contrast: str, effect: str, size: int) -> str:
    """Settings of the chunks of one contrast, effect level and sample size, as JSON text (the Snakemake params)."""
    inference = plan.study.inference
    levels = effect_levels(spec)
    if effect not in levels:
        raise UserError(f"power: unknown effect level '{effect}' (known: {', '.join(levels)})")
    region = spec.effect.model_dump(mode="json", include={"channels", "freq_hz", "time_ms"})
    settings = {
        "contrast": contrast,
        "seed": plan.study.seed,
        "effect": {"tag": effect, "source": spec.effect.source, "size": levels[effect], **region},
        "n": int(size),
        "studies": spec.studies,
        "chunks": spec.chunks,
        "permutations": spec.permutations or inference.permutations,
        "study_permutations": inference.permutations,
        "alpha": inference.alpha,
        "collectors": plan.null_collectors() if inference.needs_null else [],
        "corrections": [json.loads(plan.correction_settings(c.label)) for c in inference.corrections],
        **plan.statistic_settings(),
    }
    return _json(settings)


def table_settings(plan, spec, contrast: str) -> str:
    """Settings of one contrast's power table: every chunk's settings, the target and the grid."""
    levels = effect_levels(spec)
    return _json(
        {
            "contrast": contrast,
            "target": spec.target,
            "sizes": list(spec.sample_sizes),
            "effects": list(levels),
            "chunk_settings": {
                f"{e}/{n}": json.loads(chunk_settings(plan, spec, contrast, e, n))
                for e in levels
                for n in spec.sample_sizes
            },
        }
    )


def chunk_files(spec, contrast: str) -> list[str]:
    """Every chunk file of a contrast (relative to the output folder)."""
    return [
        f"power/{contrast}/{effect}/n{n}/chunk-{k}.npz"
        for effect in effect_levels(spec)
        for n in spec.sample_sizes
        for k in range(spec.chunks)
    ]
