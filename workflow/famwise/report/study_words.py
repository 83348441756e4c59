"""The study table of the report in words, as a person would write the spec's settings."""

from famwise.decomposition.baseline import MODE_WORDS
from famwise.report.methods import fmt

_TAIL = {"two-sided": "two-sided", "greater": "one-sided (greater)", "less": "one-sided (less)"}


def named(name: str, method: str) -> str:
    """A correction's name, with its method in parentheses only when the two differ."""
    return name if not method or name == method else f"{name} ({method})"


def _span(window, unit: str) -> str:
    return f"{fmt(window[0])} to {fmt(window[1])} {unit}"


def baseline_words(baseline: dict) -> str:
    """E.g. 'dB change from the -500 to -200 ms baseline, each condition separately'."""
    mode = str(baseline.get("mode", "db"))
    if mode == "none" or not baseline.get("window_ms"):
        return "none (maps as decomposed)"
    if baseline.get("single_epoch"):
        scope = "each epoch against its own baseline before averaging"
    elif baseline.get("pooled"):
        scope = "one baseline pooled over all conditions"
    else:
        scope = "each condition separately"
    if mode == "subtract":
        return f"mean voltage of the {_span(baseline['window_ms'], 'ms')} baseline subtracted, {scope}"
    return f"{MODE_WORDS.get(mode, mode)} from the {_span(baseline['window_ms'], 'ms')} baseline, {scope}"


def decomposition_words(tf: dict) -> str:
    """E.g. 'power from Morlet wavelets (7 cycles) at 12 log-spaced frequencies, 4 to 30 Hz'."""
    grid = tf.get("frequencies") or {}
    method = str(tf.get("method", "morlet"))
    if method == "none":
        return _voltage_words(tf)
    if method == "multitaper":
        how = f"DPSS multitaper ({fmt(tf.get('taper_length_ms'))} ms tapers, NW = {fmt(tf.get('nw'))})"
    elif tf.get("fwhm_ms") is not None:
        how = f"Morlet wavelets ({_width(tf['fwhm_ms'])} ms full width at half maximum)"
    else:
        how = f"Morlet wavelets ({_width(tf.get('cycles'))} cycles)"
    spacing = {"log": "log-spaced ", "linear": "evenly spaced "}.get(str(grid.get("spacing", "")), "")
    return (
        f"{tf.get('measure', 'power')} from {how} at {fmt(grid.get('count'))} {spacing}frequencies, "
        f"{_span((grid.get('lowest_hz'), grid.get('highest_hz')), 'Hz')}"
    )


def _voltage_words(tf: dict) -> str:
    """E.g. 'none: condition mean voltage (µV), zero-phase low-pass 20 Hz, one value every 20 ms by decimation'."""
    lowpass = f"zero-phase low-pass {fmt(tf['lowpass_hz'])} Hz" if tf.get("lowpass_hz") else "no low-pass"
    step = f"one value every {fmt(tf['time_step_ms'])} ms by decimation" if tf.get("time_step_ms") else "every sample"
    return f"none: condition mean voltage (µV), {lowpass}, {step}"


def _width(value) -> str:
    return f"{fmt(value[0])} rising to {fmt(value[1])}" if isinstance(value, (list, tuple)) else fmt(value)


def window_words(analysis: dict, *, voltage: bool = False) -> str:
    """E.g. '0 to 800 ms, 4 to 30 Hz, every channel' (voltage maps: no frequency)."""
    time = analysis.get("time_ms")
    band = analysis.get("freq_hz")
    channels = analysis.get("channels")
    whole = "from the event to the end of the epoch" if voltage else "the widest time window free of edge effects"
    return ", ".join(
        [_span(time, "ms") if time else whole]
        + ([] if voltage else [_span(band, "Hz") if band else "every frequency"])
        + [f"channels {', '.join(channels)}" if channels else "every channel"]
    )


def inference_words(inference: dict) -> str:
    """E.g. 't statistic, two-sided at alpha 0.05, 999 permutations'."""
    return (
        f"{inference.get('statistic', 't')} statistic, {_TAIL.get(str(inference.get('tail', 'two-sided')), inference.get('tail'))}"
        f" at alpha {fmt(inference.get('alpha'))}, {fmt(inference.get('permutations'))} permutations"
    )
