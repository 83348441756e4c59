"""Shared fixtures: tiny studies written into temporary folders."""

import os
import re
import textwrap
from pathlib import Path

import numpy as np
import pytest

import famwise.io

os.environ.setdefault("MPLBACKEND", "Agg")

OPT_IN_MARKERS = ("slow", "slurm")


def pytest_collection_modifyitems(config, items):
    """Leave out slow and slurm tests unless the -m expression names them.

    pyproject's addopts hold ``-m 'not slow and not slurm'``, but a -m on the command
    line replaces it: ``pytest -m "not workflow"`` (the unit tier) would otherwise run
    the long calibrations and the SLURM test too.
    """
    expression = config.getoption("markexpr") or ""
    left_out = [m for m in OPT_IN_MARKERS if not re.search(rf"\b{m}\b", expression)]
    dropped = [item for item in items if any(item.get_closest_marker(m) for m in left_out)]
    if dropped:
        config.hook.pytest_deselected(items=dropped)
        items[:] = [item for item in items if item not in dropped]


def ring(n_ch: int) -> dict:
    """Channel graph of a ring (each channel touches the previous and the next), as CSR ``indptr``/``indices``."""
    indices = np.sort(np.array([[(c - 1) % n_ch, (c + 1) % n_ch] for c in range(n_ch)]), axis=1).ravel()
    return dict(indptr=np.arange(0, 2 * n_ch + 1, 2, dtype=np.int32), indices=indices.astype(np.int32))


TINY_CHANNELS = ["Fz", "FC1", "FC2", "Cz", "C3", "C4", "Pz", "Oz"]


def write_tiny_subject(
    path: Path,
    rng: np.random.Generator,
    *,
    effect: float = 2.0,
    n_per_condition: int = 12,
    sample_rate_hz: float = 100.0,
    channels=TINY_CHANNELS,
) -> None:
    """One subject's epochs: noise plus a 7 Hz burst on Fz/FC1/FC2, stronger in condition 'high'. Invented data."""
    times = np.arange(-0.6, 1.0, 1 / sample_rate_hz)
    labels = ["high"] * n_per_condition + ["low"] * n_per_condition
    data = rng.normal(scale=5e-6, size=(len(labels), len(channels), times.size))
    envelope = np.exp(-0.5 * ((times - 0.4) / 0.12) ** 2)
    for epoch, label in enumerate(labels):
        amplitude = (effect if label == "high" else 0.5) * 5e-6
        burst = amplitude * envelope * np.cos(2 * np.pi * 7 * times + rng.uniform(0, 2 * np.pi))
        for name in ("Fz", "FC1", "FC2"):
            if name in channels:
                data[epoch, list(channels).index(name)] += burst
    famwise.io.save_epochs(
        path,
        data,
        sample_rate_hz=sample_rate_hz,
        epoch_start_s=float(times[0]),
        channels=list(channels),
        event_labels=labels,
    )


TINY_SPEC = """\
version: 1
name: tiny test study
seed: 7
subjects:
  source: epochs
  path: data/sub-{{subject}}.npz
  min_epochs: 5
conditions:
  high: [high]
  low: [low]
decomposition:
  frequencies: {{lowest_hz: 6, highest_hz: 14, count: 3, spacing: linear}}
  cycles: 3
  time_step_ms: 50
  baseline: {{mode: db, window_ms: [-400, -200]}}
channels:
  positions: 10-10
contrasts:
  - name: high-vs-low
    test: paired
    conditions: [high, low]
inference:
  alpha: 0.05
  permutations: {permutations}
  shards: 2
  corrections:
{corrections}
"""

DEFAULT_CORRECTIONS = """\
    - method: bonferroni
    - method: holm
    - method: fdr-bh
    - method: max-stat
"""


def write_tiny_study(
    folder: Path, *, n_subjects: int = 6, permutations: int = 63, corrections: str = DEFAULT_CORRECTIONS, seed: int = 0
) -> Path:
    """A tiny epochs study (8 channels, 3 frequencies) and its spec; returns the spec path."""
    rng = np.random.default_rng(seed)
    (folder / "data").mkdir(parents=True, exist_ok=True)
    for number in range(1, n_subjects + 1):
        write_tiny_subject(folder / "data" / f"sub-{number:02d}.npz", rng)
    spec = folder / "study.yaml"
    spec.write_text(
        TINY_SPEC.format(permutations=permutations, corrections=textwrap.indent(textwrap.dedent(corrections), "    "))
    )
    return spec


@pytest.fixture
def tiny_study(tmp_path) -> Path:
    return write_tiny_study(tmp_path)
