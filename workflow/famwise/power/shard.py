"""One shard of simulated studies through every configured correction.

Study ``i`` of a contrast, effect level and sample size draws from its own
random stream, ``SeedSequence([seed, 0x9043, crc32(contrast), crc32(effect),
n, i])``, so its outcome does not depend on the sharding. Every simulated
study is tested with its own permutation table of the study's kind and size
(seeded from the study's stream: one table shared by all studies would make
their error rates depend on that one table), and goes through the same
machinery as the calibration (`famwise.calibrate.datasets.correction_masks`): the statistic,
the null collectors (curtailed per correction once its decision at alpha is
settled, `famwise.power.sequential`), and each correction's own function.

Per study and correction the shard keeps: whether any point of the effect
region is significant (a detection), the share of the region's points that
are significant, and whether any point outside it is significant (a false
positive: the effect is zero there).
"""

import tempfile
import zlib
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

import numpy as np

from famwise.calibrate.datasets import correction_masks
from famwise.calibrate.settings import UNCORRECTED
from famwise.design import ContrastData, load_contrast
from famwise.nulls.shard import load_graph_arrays, table_for
from famwise.nulls.tables import shard_bounds
from famwise.observed import left_out_points, observed_arrays
from famwise.power.sequential import SettledRunner
from famwise.power.simulate import SimulatedStudy, effect_map, pilot_from, region_mask, simulate_study
from famwise.settings import PowerShardSettings
from famwise.settings_codec import to_json

STREAM = 0x9043
"""Tag of the power simulation's random streams (apart from the calibration's and the tables')."""


def study_rng(seed: int, contrast: str, effect: str, n: int, index: int) -> np.random.Generator:
    """The random stream of one simulated study (independent of sharding)."""
    key = [int(seed), STREAM, zlib.crc32(contrast.encode()), zlib.crc32(effect.encode()), int(n), int(index)]
    return np.random.default_rng(np.random.SeedSequence(key))


def simulated_design(data: ContrastData, study: SimulatedStudy) -> ContrastData:
    """The design of one simulated study: the pilot's points and covariate coding, n new subjects."""
    names = tuple(f"sim{i + 1}" for i in range(study.x.shape[0]))
    return replace(
        data,
        x=study.x,
        subjects=names,
        groups=study.groups,
        covariate=study.covariate,
        nuisance=study.nuisance,
    )


def study_outcomes(masks: list[np.ndarray], region: np.ndarray) -> np.ndarray:
    """(c, 3) float: detected in the region (0/1), share of the region recovered, any point outside (0/1; NaN without outside)."""
    outside = ~region
    rows = []
    for mask in masks:
        inside = mask & region
        false = float(np.any(mask & outside)) if outside.any() else np.nan
        rows.append((float(inside.any()), np.count_nonzero(inside) / np.count_nonzero(region), false))
    return np.array(rows)


def power_shard(
    subjects_file: Path,
    graph_file: Path | None,
    *,
    shard: int,
    settings: PowerShardSettings,
    progress: Callable[[str], None] | None = None,
) -> dict[str, np.ndarray]:
    """Simulate the studies of shard ``shard`` and apply every correction to each.

    Parameters
    ----------
    subjects_file : path
        The pilot's ``contrasts/<c>/subjects.npz``.
    graph_file : path or None
        ``channels/graph.npz`` when a cluster or TFCE correction links channels.
    shard : int
        Shard index: studies [k m, (k + 1) m), m = ceil(studies / shards).
    settings : PowerShardSettings
        From `famwise.power.settings.power_shard_settings`.
    progress : callable, optional
        Called with a line of text after each study.

    Returns
    -------
    dict of str to ndarray
        ``studies`` int64 (s,); ``labels`` str (c,), ``"uncorrected"`` first;
        ``detected`` bool (s, c); ``recovered`` float64 (s, c), share of the
        region's points significant; ``outside`` float64 (s, c), 1 when a
        point outside the region is significant (NaN when the region is the
        whole map); ``region_points``, ``points``; ``table_rows`` (identity
        included; 0 without a table); ``rows_used`` int64 (s, c), table rows
        each max-type correction's null was computed on (fewer only once its
        decision was settled, see `famwise.power.sequential`; 0 for
        corrections without a max-type null); ``settings`` as JSON text.
    """
    data = load_contrast(Path(subjects_file))
    spec = settings.effect
    region = region_mask(data, channels=spec.channels, freq_hz=spec.freq_hz, time_ms=spec.time_ms)
    pilot = pilot_from(data)
    effect = effect_map(pilot, source=spec.source, size=spec.size, region=region)
    # The pilot's own degenerate points stop the simulation as they stop the observed stage (or are left out).
    pilot_left_out = left_out_points(observed_arrays(data, data.x, settings.observed))
    n, name, tag = settings.n, settings.contrast, spec.tag
    start, stop = shard_bounds(settings.studies, settings.shards, shard)
    labels = [UNCORRECTED] + [c.correction.label for c in settings.corrections]
    graph = load_graph_arrays(graph_file, len(data.channels))
    outcomes = np.zeros((stop - start, len(labels), 3))
    rows_used = np.zeros((stop - start, len(labels)), dtype=np.int64)
    table = None
    with tempfile.TemporaryDirectory(prefix="famwise-power-") as scratch:
        folder = Path(scratch) / "contrasts" / name
        for row, index in enumerate(range(start, stop)):
            rng = study_rng(settings.nulls.seed, name, tag, n, index)
            study = simulate_study(pilot, effect, n, rng)
            design = simulated_design(data, study)
            if settings.nulls.collectors:  # each study its own random table, as each real study has
                table = table_for(design, settings=replace(settings.nulls, seed=int(rng.integers(2**63 - 1))))
            runner = SettledRunner(settings.alpha)
            masks = correction_masks(
                study.x, design, table, graph, graph_file, folder, settings, pilot_left_out, runner=runner
            )
            outcomes[row] = study_outcomes(masks, region)
            rows_used[row] = [runner.rows_used.get(label, 0) for label in labels]
            if progress:
                progress(f"power {name}: {tag}: n {n}: shard {shard}: {row + 1}/{stop - start} studies")
    return {
        "studies": np.arange(start, stop, dtype=np.int64),
        "labels": np.array(labels),
        "detected": outcomes[:, :, 0] > 0,
        "recovered": outcomes[:, :, 1],
        "outside": outcomes[:, :, 2],
        "region_points": np.array(int(np.count_nonzero(region))),
        "points": np.array(int(region.size)),
        "table_rows": np.array(0 if table is None else table.n_rows),
        "rows_used": rows_used,
        "settings": np.array(to_json(settings)),
    }
