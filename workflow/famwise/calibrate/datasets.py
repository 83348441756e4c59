"""Null datasets made from the subjects' own maps, and one shard of the calibration.

A null dataset keeps every subject's map whole, so the real spatial, spectral
and temporal smoothness stays, and breaks only the link the contrast tests:

- one-sample, paired, weighted: each subject's map (difference map, weighted
  sum of condition maps) times a random sign;
- two-sample (also the group x condition interaction), between-groups,
  correlation: the subjects' maps are reassigned to the group labels
  (covariate values) in a random order;
- repeated measures: each subject's condition maps are reassigned to the
  conditions in a random order, within that subject;
- regression: the reduced model's fit (intercept and nuisance covariates)
  plus its residuals in a random subject order (Freedman & Lane 1983): the
  nuisance covariates keep their effects, the tested one has none beyond them.

Dataset ``i`` of a contrast always draws from its own random stream, seeded
by ``SeedSequence([seed, 0xCA11, crc32(contrast), i])``, apart from the
study's permutation table, so the outcome of a dataset does not depend on the
number of shards it was computed in. Each dataset then goes through the
study's own pipeline: the statistic, the null collectors over the study's
permutation table (possibly with fewer permutations), and every configured
correction through `famwise.correct.apply.apply_correction`. A dataset counts
as a detection for a correction when any point is significant.

Because a resampled dataset is itself a member of the resampling group, the
permutation table of the study applies to it unchanged (for sign flips,
s * x permuted by the table's flips is again a sign-flipped copy of x), and
the permutation corrections control the family-wise error exactly under this
randomization; the parametric ones are tested against the data's own
distribution.

References
----------
Nichols TE, Holmes AP (2002). Nonparametric permutation tests for functional
neuroimaging. Hum Brain Mapp 15:1-25.
"""

import tempfile
import zlib
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

import numpy as np

from famwise.atomic import save_npz
from famwise.calibrate.settings import UNCORRECTED
from famwise.correct.apply import apply_correction
from famwise.degenerate import blank
from famwise.design import ContrastData, load_contrast
from famwise.nulls.engine import run_shard
from famwise.nulls.freedman_lane import freedman_lane_dataset
from famwise.nulls.screen import BlockScreen
from famwise.nulls.shard import load_graph_arrays, make_collectors, table_for
from famwise.nulls.tables import shard_bounds
from famwise.observed import left_out_points, observed_arrays, save_observed
from famwise.settings import CalibrationSettings
from famwise.settings_codec import to_json
from famwise.stats import SIGN_FLIP_TESTS

STREAM = 0xCA11
"""Tag of the calibration's random streams (apart from the permutation table's)."""


def dataset_rng(seed: int, contrast: str, index: int) -> np.random.Generator:
    """The random stream of null dataset ``index`` of a contrast (independent of sharding)."""
    return np.random.default_rng(np.random.SeedSequence([int(seed), STREAM, zlib.crc32(contrast.encode()), int(index)]))


def null_dataset(data: ContrastData, rng: np.random.Generator) -> np.ndarray:
    """One null dataset from the subjects' own maps.

    Parameters
    ----------
    data : ContrastData
        ``x`` of shape (n, P) or, for repeated measures, (n, k, P).
    rng : numpy.random.Generator

    Returns
    -------
    ndarray, same shape and dtype as ``data.x``
        Sign-flipped maps (one-sample, paired, weighted), maps in a random
        subject order against fixed labels or covariate values (two-sample,
        between-groups, correlation), condition maps in a random order within
        each subject (repeated measures), or the reduced model's fit plus its
        residuals in a random order (regression).
    """
    x = data.x
    n = x.shape[0]
    if data.test in SIGN_FLIP_TESTS:
        signs = (1 - 2 * rng.integers(0, 2, size=n)).astype(x.dtype)
        return signs.reshape((n,) + (1,) * (x.ndim - 1)) * x
    if data.test == "repeated-measures":
        order = rng.permuted(np.broadcast_to(np.arange(x.shape[1]), (n, x.shape[1])), axis=1)
        return np.take_along_axis(x, order[:, :, None], axis=1)
    if data.test == "regression":
        return freedman_lane_dataset(x, data.covariate, data.nuisance, rng.permutation(n))
    return x[rng.permutation(n)]


def calibration_shard(
    subjects_file: Path,
    graph_file: Path | None,
    *,
    shard: int,
    settings: CalibrationSettings,
    progress: Callable[[str], None] | None = None,
) -> dict[str, np.ndarray]:
    """Run the null datasets of shard ``shard`` through every correction.

    Parameters
    ----------
    subjects_file : path
        ``contrasts/<c>/subjects.npz``.
    graph_file : path or None
        ``channels/graph.npz`` when a cluster or TFCE correction links channels.
    shard : int
        Shard index; it holds datasets [k m, (k + 1) m) with
        m = ceil(datasets / shards).
    settings : CalibrationSettings
        From :func:`calibration_settings`.
    progress : callable, optional
        Called with a line of text after each dataset.

    Returns
    -------
    dict of str to ndarray
        ``datasets`` int64 (d,) dataset indices; ``labels`` str (c,) the
        corrections, ``"uncorrected"`` first; ``n_significant`` int64 (d, c)
        significant points per dataset and correction; ``detected`` bool
        (d, c); ``table_rows`` rows of the permutation table each dataset
        was tested with (identity included; 0 without one); ``settings`` the
        settings as JSON text.
    """
    data = load_contrast(Path(subjects_file))
    start, stop = shard_bounds(settings.datasets, settings.shards, shard)
    labels = [UNCORRECTED] + [c.correction.label for c in settings.corrections]
    table = table_for(data, settings=settings.nulls) if settings.nulls.collectors else None
    graph = load_graph_arrays(graph_file, len(data.channels))
    counts = np.zeros((stop - start, len(labels)), dtype=np.int64)
    study_left_out = left_out_points(
        observed_arrays(data, data.x, settings.observed)
    )  # stops as the observed stage does
    name = settings.contrast
    with tempfile.TemporaryDirectory(prefix="famwise-calibrate-") as scratch:
        folder = Path(scratch) / "contrasts" / name
        for row, index in enumerate(range(start, stop)):
            x = null_dataset(data, dataset_rng(settings.nulls.seed, name, index))
            masks = correction_masks(x, data, table, graph, graph_file, folder, settings, study_left_out)
            counts[row] = [int(np.count_nonzero(mask)) for mask in masks]
            if progress:
                progress(f"calibration {name}: shard {shard}: {row + 1}/{stop - start} datasets")
    return {
        "datasets": np.arange(start, stop, dtype=np.int64),
        "labels": np.array(labels),
        "n_significant": counts,
        "detected": counts > 0,
        "table_rows": np.array(0 if table is None else table.n_rows),
        "settings": np.array(to_json(settings)),
    }


def correction_masks(
    x: np.ndarray,
    data: ContrastData,
    table,
    graph,
    graph_file: Path | None,
    folder: Path,
    settings,
    study_left_out: np.ndarray,
    *,
    runner: Callable = run_shard,
) -> list[np.ndarray]:
    """Significant points of one dataset: uncorrected (parametric p <= alpha), then each correction.

    Parameters
    ----------
    x : ndarray, shape of ``data.x``
        The dataset's subject maps.
    data : ContrastData
        The design (test, groups, covariate, points) ``x`` belongs to.
    table : PermutationTable or None
        The table the permutation corrections use (None when none does).
    graph : tuple of ndarray
        CSR neighbor arrays (`famwise.nulls.shard.load_graph_arrays`).
    graph_file : path or None
        ``channels/graph.npz``, for the cluster and TFCE corrections.
    folder : path
        Scratch ``contrasts/<c>`` folder the stage files are written to.
    settings : CalibrationSettings or PowerShardSettings
        Its ``contrast``, ``alpha``, ``observed``, ``nulls`` and ``corrections``.
    study_left_out : ndarray of bool, (P,)
        Points the study's observed stage leaves out (left out here too).
    runner : callable
        Runs the table's rows through the collectors, with the signature of
        `famwise.nulls.engine.run_shard` (the default).

    Returns
    -------
    list of ndarray of bool, each (P,)
    """
    # The observed stage's own record (forming thresholds, points left out): the study's left-out points
    # and the null dataset's own degenerate points are left out.
    observed = observed_arrays(data, x, replace(settings.observed, degenerate_points="leave-out"), study_left_out)
    left_out = left_out_points(observed)
    inputs = [folder / "observed.npz"]
    save_observed(inputs[0], observed)
    if table is not None:
        collectors = make_collectors(settings.nulls.collectors, observed=observed, shape=data.shape, graph=graph)
        statistic = {
            "statistic": settings.nulls.statistic,
            "trim": settings.nulls.trim,
            "equal_var": settings.nulls.equal_var,
        }
        arrays = runner(
            blank(x, left_out),
            table.rows,
            collectors=collectors,
            test=data.test,
            groups=data.groups,
            covariate=data.covariate,
            nuisance=data.nuisance,
            screen=BlockScreen(left_out, tail=str(observed["tail"])),
            **statistic,
        )
        arrays["rows"] = np.array([0, table.n_rows])
        arrays["n_rows.total"] = np.array(table.n_rows)
        inputs.append(folder / "nulls" / "shard-0.npz")
        save_npz(inputs[1], **arrays)
    masks = [np.asarray(observed["p"] <= settings.alpha).reshape(-1)]  # NaN p (left out) is never <= alpha
    for correction in settings.corrections:
        files = list(inputs)
        if correction.correction.method in ("cluster", "tfce") and graph_file is not None:
            files.append(Path(graph_file))
        outcome, _ = apply_correction(files, contrast=settings.contrast, settings=correction)
        masks.append(np.asarray(outcome.mask, dtype=bool).reshape(-1))
    return masks
