"""Each subject's mean over the spec's planned regions (``planned_regions``), per condition and contrast.

A planned region (channels, a frequency band, a time window) is named in the
spec before looking at the data, so its values are not selected by the test's
result: unlike the values of a significant cluster they are unbiased estimates
of the effect there (Kriegeskorte et al. 2009, Nature Neuroscience 12:535-540).
Written to ``contrasts/<c>/planned_values.tsv`` with a JSON sidecar.
"""

from pathlib import Path

import numpy as np

from famwise.design import load_contrast, weighted_sum
from famwise.errors import UserError
from famwise.settings import PlannedRegionSettings, SubjectValuesSettings
from famwise.spec.contrast_design import contrast_weights
from famwise.subject_values import measure_text, value_columns, write_subject_values


def region_index(
    region: PlannedRegionSettings, number: int, channels, freqs: np.ndarray, times: np.ndarray, valid: np.ndarray
) -> tuple:
    """Index arrays (channels, frequencies, times) of one planned region in a time-frequency grid.

    Parameters
    ----------
    region : PlannedRegionSettings
        ``name``, ``channels``, ``freq_hz`` [low, high] (None: every frequency, e.g. the single entry of a
        voltage map) and ``time_ms`` [start, end].
    number : int
        Position in ``planned_regions`` (for messages).
    channels : sequence of str
    freqs, times : ndarray
        Hz and s.
    valid : ndarray of bool, shape (n_freqs, n_times)
        False in the cone of influence.
    """
    where = f"planned_regions[{number}] ('{region.name}')"
    lookup = {c.lower(): i for i, c in enumerate(channels)}
    unknown = [c for c in region.channels if c.lower() not in lookup]
    if unknown:
        raise UserError(f"{where}.channels: unknown channels {unknown} (the data have {', '.join(channels)})")
    f = np.arange(freqs.size) if region.freq_hz is None else _band_index(region.freq_hz, freqs, where)
    start, stop = region.time_ms
    t = np.flatnonzero((times >= start / 1e3 - 1e-9) & (times <= stop / 1e3 + 1e-9))
    if t.size == 0:
        raise UserError(
            f"{where}.time_ms: no time point lies in [{start:g}, {stop:g}] ms "
            f"(maps cover {times[0] * 1e3:.0f} to {times[-1] * 1e3:.0f} ms)"
        )
    if not valid[np.ix_(f, t)].all():
        raise UserError(
            f"{where}: the window reaches into the edge-affected cells (cone of influence); "
            "shorten it or use longer epochs"
        )
    return np.array([lookup[c.lower()] for c in region.channels]), f, t


def _band_index(band: tuple[float, float], freqs: np.ndarray, where: str) -> np.ndarray:
    """Indices of the frequencies (Hz) inside ``band``; a UserError naming the region when there is none."""
    low, high = band
    f = np.flatnonzero((freqs >= low - 1e-9) & (freqs <= high + 1e-9))
    if f.size == 0:
        raise UserError(
            f"{where}.freq_hz: no decomposed frequency lies in [{low:g}, {high:g}] Hz "
            f"(frequencies: {freqs.min():.3g} to {freqs.max():.3g} Hz)"
        )
    return f


def planned_means(files: list[Path], regions: tuple[PlannedRegionSettings, ...], conditions: list[str]) -> np.ndarray:
    """Each subject's mean over each region per condition, shape (n_subjects, n_conditions, n_regions)."""
    from famwise.decomposition import load_maps  # numba-backed package: loaded only here

    out = np.empty((len(files), len(conditions), len(regions)))
    for s, path in enumerate(files):
        tf = load_maps(path)
        for r, region in enumerate(regions):
            index = np.ix_(*region_index(region, r, tf.channels, tf.freqs, tf.times, tf.valid))
            for k, name in enumerate(conditions):
                if name not in tf.conditions:
                    raise UserError(f"{path}: condition '{name}' has no maps")
                out[s, k, r] = tf.values[tf.conditions.index(name)][index].astype(np.float64).mean()
    return out


def run_planned(settings: SubjectValuesSettings, subjects: Path, files: list[Path], out: Path) -> None:
    """The stage: the contrast's subjects' maps -> planned_values.tsv and .json."""
    regions = settings.regions
    names = [r.name for r in regions]
    if len(set(names)) != len(names):
        raise UserError(f"planned_regions: names must differ (found {names})")
    conditions = list(settings.conditions)
    data = load_contrast(subjects)
    if len(files) != len(data.subjects):
        raise UserError(f"planned values: {len(files)} time-frequency files for {len(data.subjects)} subjects")
    means = planned_means(files, regions, conditions)
    test = settings.test
    weights = contrast_weights(test, len(conditions), settings.weights)
    lines = []
    for r, region in enumerate(regions):
        size = len(region.channels) * _count(files[0], region, r)
        for s, subject in enumerate(data.subjects):
            line = {"id": region.name, "n_points": size, "subject": subject}
            if settings.group_names is not None:
                line["group"] = settings.group_names[int(data.groups[s])]
            if data.covariate is not None:
                line["covariate"] = float(data.covariate[s])
            line |= {name: float(means[s, k, r]) for k, name in enumerate(conditions)}
            if weights is not None:
                line["contrast"] = float(weighted_sum(means[None, s, :, r], weights)[0])
            lines.append(line)
    write_subject_values(
        out,
        lines,
        _sidecar(
            test,
            conditions,
            regions,
            measure_text(files[0]),
            grouped=settings.group_names is not None,
            covariate=settings.covariate_name if data.covariate is not None else None,
            weights=settings.weights,
        ),
    )


def _count(path: Path, region: PlannedRegionSettings, number: int) -> int:
    """Frequencies x times of a region in one file's grid."""
    with np.load(path, allow_pickle=False) as tf:
        valid = tf["valid"] if "valid" in tf.files else np.ones((len(tf["freqs"]), len(tf["times"])), bool)
        _, f, t = region_index(region, number, [str(c) for c in tf["channels"]], tf["freqs"], tf["times"], valid)
    return f.size * t.size


def _sidecar(
    test: str,
    conditions: list[str],
    regions: tuple[PlannedRegionSettings, ...],
    measure: str,
    *,
    grouped: bool,
    covariate: str | None,
    weights: tuple[float, ...] | None,
) -> dict:
    described = {
        "id": {
            "Description": "Planned region name (spec key planned_regions).",
            "Levels": {
                r.name: f"{','.join(r.channels)}; "
                + _band_words(r.freq_hz, measure)
                + f"{r.time_ms[0]:g} to {r.time_ms[1]:g} ms"
                for r in regions
            },
        },
    }
    return described | value_columns(
        test, conditions, measure, over="the region", grouped=grouped, covariate=covariate, weights=weights
    )


def _band_words(band: tuple[float, float] | None, measure: str) -> str:
    """A region's band for its description: none for voltage maps, "all frequencies" when omitted."""
    if measure.startswith("voltage"):
        return ""
    return "all frequencies; " if band is None else f"{band[0]:g} to {band[1]:g} Hz; "
