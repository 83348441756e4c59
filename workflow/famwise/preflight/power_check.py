"""The ``power`` section's effect region, checked on the first subject's channels before any power job runs."""

from famwise.errors import UserError
from famwise.preflight.report_check import check_analysed_channels
from famwise.preflight.where import Where


def check_power_channels(plan, spec, channels: list[str] | None, where: Where) -> None:
    """``power.effect.channels`` are analysed channels (``channels``: the first subject's; None skips the check).

    ``spec`` is the power section (`famwise.power.settings.power_spec`).
    """
    check_analysed_channels(plan, spec.effect.channels, channels, where, ("power", "effect", "channels"))


def check_power_sizes(plan, spec, contrasts: list[str], where: Where) -> None:
    """Every simulated N fits each contrast's design: 2 per group, more subjects than regression parameters.

    The same limits stop a simulated study (`famwise.power.simulate`); checked here so no power job starts.
    """
    for name in contrasts:
        contrast = plan.contrast(name)
        if contrast.test in ("two-sample", "between-groups"):
            smallest, reason = 2 * len(contrast.groups), f"{len(contrast.groups)} groups of at least 2 subjects each"
        elif contrast.test == "regression":
            parameters = 2 + len(plan.regression_design(name).nuisance_columns)
            smallest, reason = parameters + 1, f"the regression's {parameters} parameters and 1 degree of freedom"
        else:
            continue
        for index, n in enumerate(spec.sample_sizes):
            if n < smallest:
                raise UserError(
                    f"{where('power', 'sample_sizes', index)}: N = {n} is too small for contrast {name}: "
                    f"it needs at least {smallest} participants ({reason})"
                )
