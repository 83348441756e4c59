"""Observed-statistics stage: contrast data -> ``contrasts/<c>/observed.npz``.

Besides the statistic and its parametric p, the stage derives once what the
later stages need from the observed data: the effective tail (``tail``; F
tests are one-sided) and each cluster correction's forming threshold as a
statistic value (``forming_threshold.<label>``, from ``forming_p`` through the
test's own distribution and df, or ``forming_stat`` as given), and the
points left out of the family (``left_out``, see `famwise.degenerate`:
statistic 0, p NaN there). The null, correction and calibration stages read
them from here.
"""

from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.degenerate import blank, degenerate_points, describe
from famwise.design import ContrastData
from famwise.errors import UserError
from famwise.settings import FormingSettings, ObservedSettings

FORMING_KEY = "forming_threshold.{label}"
"""Key of a cluster correction's forming threshold (statistic units) in observed.npz."""


def observed_arrays(
    data: ContrastData, x: np.ndarray, settings: ObservedSettings, also_left_out: np.ndarray | None = None
) -> dict[str, np.ndarray]:
    """Every array of ``observed.npz`` for the subjects' maps ``x``.

    Parameters
    ----------
    data : ContrastData
        The contrast (design, points, labels); its ``x`` is replaced by ``x``.
    x : ndarray, shape (n, P) or (n, k, P)
        Subject maps (a calibration null dataset, or ``data.x``).
    settings : ObservedSettings
    also_left_out : ndarray of bool (P,) or None
        Points to leave out besides the degenerate ones (calibration: the
        study's left-out points in each null dataset).

    Returns
    -------
    dict of str to ndarray
        ``stat``, ``p``, ``effect``, ``effect_size``, ``left_out`` (bool) (C,
        F, T); ``df``; ``channels``, ``freqs`` (Hz), ``times`` (s); ``test``,
        ``statistic``, ``n``, ``tail`` (effective); ``forming_threshold.<label>``
        per cluster correction. At left-out points ``stat`` is 0 and ``p`` NaN.

    Raises
    ------
    UserError
        When there are degenerate points and ``settings.degenerate_points`` is ``"stop"``.
    """
    from dataclasses import replace

    from famwise.nulls.shard import identity_statistic
    from famwise.stats import compute

    statistic = {"statistic": settings.statistic, "trim": settings.trim, "equal_var": settings.equal_var}
    nonfinite = ~np.isfinite(x).reshape(-1, x.shape[-1]).all(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        result = compute(
            blank(x, nonfinite).astype(np.float64),
            test=data.test,
            groups=data.groups,
            covariate=data.covariate,
            nuisance=data.nuisance,
            tail=settings.tail,
            **statistic,
        )
    left_out = degenerate_points(x, test=data.test, groups=data.groups, stat=result.stat)
    if also_left_out is not None:
        left_out |= also_left_out
    if left_out.all():
        raise UserError(f"observed statistics: every point is degenerate: {_description(data, x, left_out)}")
    if left_out.any() and settings.degenerate_points == "stop":
        raise UserError(
            f"observed statistics: {_description(data, x, left_out)}; set inference.degenerate_points: "
            "leave-out to leave these points out of the family, or fix the maps"
        )
    # The stored map is the permutation engine's identity row (equal to result.stat up to
    # float32 rounding), so that every correction compares the null with the same bits.
    stat = identity_statistic(replace(data, x=blank(x, left_out)), settings=settings)
    p = result.p.reshape(-1)
    if left_out.any():
        stat, p = np.where(left_out, 0.0, stat), np.where(left_out, np.nan, p)
    shape = data.shape
    arrays = {
        "stat": stat.reshape(shape),
        "p": p.reshape(shape),
        "df": np.asarray(result.df),
        "effect": result.effect.reshape(shape),
        "effect_size": result.effect_size.reshape(shape),
        "left_out": left_out.reshape(shape),
        "channels": np.array(data.channels),
        "freqs": data.freqs,
        "times": data.times,
        "test": data.test,
        "statistic": result.statistic,
        "n": result.n,
        "tail": result.effective_tail,
    }
    if data.test == "regression":  # the model in words, for the report
        arrays["design_terms"] = np.array(data.design_terms, dtype=str)
    for forming in settings.forming:
        arrays[FORMING_KEY.format(label=forming.label)] = np.array(
            forming_threshold(forming, test=data.test, df=arrays["df"], tail=result.effective_tail)
        )
    return arrays


def _description(data: ContrastData, x: np.ndarray, left_out: np.ndarray) -> str:
    return describe(
        left_out,
        x=x,
        test=data.test,
        subjects=data.subjects,
        channels=data.channels,
        freqs=data.freqs,
        times=data.times,
        groups=data.groups,
    )


def left_out_points(observed: dict[str, np.ndarray]) -> np.ndarray:
    """The flat (P,) mask of points the observed stage left out of the family (none in older files)."""
    if "left_out" in observed:
        return np.asarray(observed["left_out"], dtype=bool).reshape(-1)
    return np.zeros(np.asarray(observed["stat"]).size, dtype=bool)


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
