"""The methods paragraph's sentences on voltage maps (``decomposition.method: none``): filters, average, baseline."""

from famwise.decomposition.voltage import LOWPASS_ORDER


def is_voltage_study(study: dict) -> bool:
    """Whether the spec (as JSON) asks for voltage maps instead of a time-frequency decomposition."""
    return str((study.get("decomposition") or {}).get("method", "")).lower() == "none"


def voltage_paragraph(tf: dict, fmt) -> str:
    """How each participant's voltage maps were made, with every filter setting.

    Parameters
    ----------
    tf : dict
        The spec's ``decomposition`` section (JSON).
    fmt : callable
        The methods paragraph's number formatter (`famwise.report.methods.fmt`).
    """
    text = (
        "No time-frequency decomposition was computed: each participant's map per condition was the average "
        "voltage of the condition's epochs, in microvolts"
    )
    if tf.get("lowpass_hz") is not None:
        text += (
            f", after a zero-phase low-pass filter (Butterworth, order {LOWPASS_ORDER}, cut-off "
            f"{fmt(tf['lowpass_hz'])} Hz, run forward and backward by scipy.signal.sosfiltfilt)"
        )
    if tf.get("time_step_ms") is not None:
        text += (
            f", with one value every {fmt(tf['time_step_ms'])} ms through an anti-aliasing decimator (a zero-phase, "
            "Hamming-windowed FIR low-pass of 20 q + 1 taps cutting off at half the new sampling rate, q the "
            "decimation factor; scipy.signal.decimate)"
        )
    else:
        text += ", every sample kept"
    text += ". Points are channel × time."
    if tf.get("average") == "trimmed":
        text += f" Epochs were averaged with a trimmed mean (trim {fmt(tf.get('trim'))} per end)."
    baseline = tf.get("baseline") or {}
    if str(baseline.get("mode", "none")).lower() == "subtract":
        window = baseline.get("window_ms")
        scope = "pooled over conditions (weighted by their epochs)" if baseline.get("pooled") else "per condition"
        text += (
            f" The mean voltage from {fmt(window[0])} to {fmt(window[1])} ms was subtracted from each channel, {scope}."
        )
    else:
        text += " No baseline was subtracted."
    return text


def voltage_default_window(end: str) -> str:
    """The analysis time window of voltage maps when the spec gives none; ``end`` e.g. ``" to 1200 ms"``."""
    return (
        f"the window from the event (0 ms){end}, the end of the epoch (the pre-event baseline was not tested: "
        "after baseline subtraction it cannot show an effect and would only make every family-wise correction "
        "stricter)"
    )
