"""Words about a power table: the methods sentence for a proposal and the console table."""

import math

from famwise.calibrate.settings import UNCORRECTED


def region_words(effect: dict) -> str:
    """'channels Fz, FC1; 4-8 Hz; 300-900 ms' (or 'the whole analysed map')."""
    parts = []
    if effect.get("channels"):
        parts.append("channel" + ("s " if len(effect["channels"]) > 1 else " ") + ", ".join(effect["channels"]))
    if effect.get("freq_hz"):
        parts.append(f"{effect['freq_hz'][0]:g}-{effect['freq_hz'][1]:g} Hz")
    if effect.get("time_ms"):
        parts.append(f"{effect['time_ms'][0]:g}-{effect['time_ms'][1]:g} ms")
    return "; ".join(parts) if parts else "the whole analysed map"


SIZE_NAMES = {
    "one-sample": "d_z",
    "paired": "d_z",
    "weighted": "d_z",
    "two-sample": "d",
    "between-groups": "Cohen's f",
    "correlation": "r",
    "regression": "partial r",
}
"""The name of the specified standardised size per test (`famwise.power.simulate.effect_map`)."""


def effect_words(tag: str, source: str, test: str | None = None) -> str:
    """'0.5 times the pilot's observed effect' or 'a standardised effect of d_z = 0.5' (the size named by test)."""
    size = tag.split("-", 1)[1].removeprefix("x")
    if source == "pilot":
        return f"{size} times the pilot's observed effect"
    name = SIZE_NAMES.get(test)
    return f"a standardised effect of {name} = {size}" if name else f"a standardised effect of {size}"


RESAMPLED = {
    "two-sample": "within each group, ",
    "between-groups": "within each group, ",
    "correlation": "together with each subject's covariate value, ",
    "regression": "together with each subject's covariate values (nuisance covariates included), ",
}
"""How the residual maps were drawn, where the design resamples more than the maps."""


def whole_percent(share: float) -> int:
    """A share in [0, 1] as a whole percentage, halves rounded up (0.805 -> 81, as the table's 0.81 reads)."""
    return math.floor(100 * share + 0.5 + 1e-9)


def _percent(row: dict) -> str:
    low, high = whole_percent(row["power_ci_low"]), whole_percent(row["power_ci_high"])
    return f"{whole_percent(row['power'])}% [{low}, {high}]"


def methods_sentences(rows: list[dict], info: dict, *, pilot_n: int | None = None) -> str:
    """A paragraph that can be pasted into a proposal or preregistration.

    ``info`` is the sidecar's ``Power`` entry. Per effect level, each
    correction is described at the smallest simulated n reaching the target
    power, or at the largest simulated n when none does.
    """
    effect = info["effect"]
    pilot = f"the {pilot_n} pilot participants" if pilot_n else "the pilot participants"
    text = [
        f"Statistical power was estimated by simulation (famwise power) for contrast {info['contrast']}: each simulated "
        f"study resampled the residual {info.get('maps', 'time-frequency')} maps of {pilot} with replacement, "
        f"{RESAMPLED.get(info.get('test'), '')}added the effect inside "
        f"the region ({region_words(effect)}) and none outside, and applied every planned correction at "
        f"alpha = {info['alpha']:g}"
        + (f" with {info['permutations']} permutations" if info.get("permutations") else "")
        + "."
    ]
    target = info["target"]
    for tag in dict.fromkeys(r["effect"] for r in rows):
        parts = []
        mine = [r for r in rows if r["effect"] == tag and r["correction"] != UNCORRECTED]
        for correction in dict.fromkeys(r["correction"] for r in mine):
            series = sorted((r for r in mine if r["correction"] == correction), key=lambda r: r["n"])
            reached = next((r for r in series if r["power"] >= target), None)
            if reached:
                parts.append(
                    f"with N = {int(reached['n'])}, {correction} detected the effect in {_percent(reached)} "
                    f"of {int(reached['studies']):,} simulated studies"
                )
            else:
                last = series[-1]
                parts.append(
                    f"{correction} did not reach {100 * target:.0f}% up to N = {int(last['n'])} "
                    f"({_percent(last)} of {int(last['studies']):,} simulated studies)"
                )
        text.append(f"For {effect_words(tag, effect['source'], info.get('test'))}: " + "; ".join(parts) + ".")
    text.append(
        "Intervals are exact binomial 95% Monte Carlo intervals. The simulation takes the pilot's noise "
        "structure as representative and the effect as stated; a pilot's observed effect is inflated by "
        "selection."
    )
    return " ".join(text)


def format_rows(rows: list[dict], info: dict) -> str:
    """The power table as aligned text, with the smallest n reaching the target per correction."""
    lines = [
        f"  {'effect':<12} {'n':>4}  {'correction':<14} {'power':>6}  {'95% interval':<15} {'recovered':>9}  {'false pos.':>10}"
    ]
    for row in rows:
        interval = f"[{row['power_ci_low']:.2f}, {row['power_ci_high']:.2f}]"
        fp = "n/a" if row["false_positive_rate"] is None else f"{row['false_positive_rate']:.3f}"
        lines.append(
            f"  {row['effect']:<12} {int(row['n']):>4}  {row['correction']:<14} {row['power']:>6.2f}  "
            f"{interval:<15} {row['recovered']:>9.2f}  {fp:>10}"
        )
    lines.append(f"  smallest n reaching power {info['target']:g} (estimate; lower interval end):")
    for tag, entries in info["smallest_n"].items():
        for correction, found in entries.items():
            if correction != UNCORRECTED:
                lines.append(
                    f"    {tag:<12} {correction:<14} {found['n_target'] or 'beyond the grid'}; "
                    f"{found['n_target_sure'] or 'beyond the grid'}"
                )
    return "\n".join(lines)
