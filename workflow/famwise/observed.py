"""Observed-statistics stage: contrast data -> ``contrasts/<c>/observed.npz``.

Besides the statistic and its parametric p, the stage derives once what the
later stages need from the observed data: the effective tail (``tail``; F
tests are one-sided) and each cluster correction's forming threshold as a
statistic value (``forming_threshold.<label>``, from ``forming_p`` through the
test's own distribution and df, or ``forming_stat`` as given). The null,
correction and calibration stages read them from here.
"""

from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.design import ContrastData
from famwise.settings import FormingSettings, ObservedSettings

FORMING_KEY = "forming_threshold.{label}"
"""Key of a cluster correction's forming threshold (statistic units) in observed.npz."""


def observed_arrays(data: ContrastData, x: np.ndarray, settings: ObservedSettings) -> dict[str, np.ndarray]:
    """Every array of ``observed.npz`` for the subjects' maps ``x``.

    Parameters
    ----------
    data : ContrastData
        The contrast (design, points, labels); its ``x`` is replaced by ``x``.
    x : ndarray, shape (n, P) or (n, k, P)
        Subject maps (a calibration null dataset, or ``data.x``).
    settings : ObservedSettings

    Returns
    -------
    dict of str to ndarray
        ``stat``, ``p``, ``effect``, ``effect_size`` (C, F, T); ``df``;
        ``channels``, ``freqs`` (Hz), ``times`` (s); ``test``, ``statistic``,
        ``n``, ``tail`` (effective); ``forming_threshold.<label>`` per
        cluster correction.
    """
    from dataclasses import replace

    from famwise.nulls.shard import identity_statistic
    from famwise.stats import compute

    statistic = {"statistic": settings.statistic, "trim": settings.trim, "equal_var": settings.equal_var}
    result = compute(
        x.astype(np.float64),
        test=data.test,
        groups=data.groups,
        covariate=data.covariate,
        tail=settings.tail,
        **statistic,
    )
    # The stored map is the permutation engine's identity row (equal to result.stat up to
    # float32 rounding), so that every correction compares the null with the same bits.
    stat = identity_statistic(replace(data, x=x), settings=settings)
    shape = data.shape
    arrays = {
        "stat": stat.reshape(shape),
        "p": result.p.reshape(shape),
        "df": np.asarray(result.df),
        "effect": result.effect.reshape(shape),
        "effect_size": result.effect_size.reshape(shape),
        "channels": np.array(data.channels),
        "freqs": data.freqs,
        "times": data.times,
        "test": data.test,
        "statistic": result.statistic,
        "n": result.n,
        "tail": result.effective_tail,
    }
    for forming in settings.forming:
        arrays[FORMING_KEY.format(label=forming.label)] = np.array(
            forming_threshold(forming, test=data.test, df=arrays["df"], tail=result.effective_tail)
        )
    return arrays


def forming_threshold(forming: FormingSettings, *, test: str, df, tail: str) -> float:
    """The cluster-forming threshold in statistic units: ``forming_stat``, or from ``forming_p``."""
    if forming.forming_stat is not None:
        return float(forming.forming_stat)
    from famwise.stats import forming_threshold as from_p

    return float(from_p(forming.forming_p, test=test, df=df, tail=tail))


def save_observed(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """Write ``observed.npz`` atomically."""
    save_npz(Path(path), **arrays)


def load_observed(path: Path) -> dict[str, np.ndarray]:
    """Every array of an ``observed.npz``."""
    with np.load(path, allow_pickle=False) as archive:
        return {key: archive[key] for key in archive.files}


def stored_forming_threshold(observed: dict[str, np.ndarray], label: str) -> float:
    """The forming threshold of cluster correction ``label`` that the observed stage stored."""
    return float(observed[FORMING_KEY.format(label=label)])
