"""Scheduler resources of each rule, estimated from the study's sizes.

A cluster scheduler needs each job's memory (MB) and wall time (minutes) in
advance. The rules ask these functions, which work from what the plan knows
before anything runs: the subjects' input files (their bytes, the recording's
header and events), the spec's frequencies, epoch and analysis windows,
contrasts, permutations and shards. Every rule is single-threaded (one cpu
per job, from the rules' ``threads``), so cpus are not estimated here.

Memory model (bytes; ``P`` = points per contrast = channels x frequencies x
times, ``S`` = subjects, ``C`` = conditions):

- every job: ``BASE_MEM_MB`` for the interpreter with numpy, scipy and numba
  loaded;
- decompose: the input file + 2 x the epochs as float64 + 2 x the FFT block
  of one channel + 2 x the condition maps;
- contrast data: 3 x the subjects' maps (S x C x channels x frequencies x epoch
  times, float64);
- observed, null info: 8 x the contrast data (S x C x P, float32) + 16 x P float64
  result maps;
- null shard: 3 x the contrast data + ``NULL_BYTES_PER_POINT`` x P for the
  block of permuted maps, the collectors and the per-thread cluster buffers;
- correct: observed and working maps (32 x P float64, 48 x P for cluster and
  TFCE) + the merged null (one maximum per permutation row, one count per
  point; 4 copies) for every contrast of the family;
- report: 16 x P float64 per contrast and correction + ``FIGURE_MEM_MB`` for
  the figures;
- subjects table, channel graph: the base.

The sum is multiplied by ``MEM_SAFETY`` and rounded up to 100 MB.

Runtime model: the operation count of the stage divided by a conservative
rate (``FFT_RATE``, ``NULL_RATE``: operations per second of one slow cluster
core), times ``TIME_SAFETY``, at least ``MIN_RUNTIME_MIN`` minutes (queue
start-up, file-system latency and Python imports dominate small jobs).
"""

import csv
import math
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from famwise.decomposition.decompose import BLOCK_BYTES

MB = 2**20
BASE_MEM_MB = 250
FIGURE_MEM_MB = 300
MEM_SAFETY = 1.5
NULL_BYTES_PER_POINT = 4096
MIN_RUNTIME_MIN = 10
TIME_SAFETY = 3.0
FFT_RATE = 2e8
NULL_RATE = 1e8
# Fallbacks when a size cannot be read before the run (e.g. maps given as input).
FALLBACK_CHANNELS = 128
FALLBACK_SAMPLE_RATE_HZ = 1000.0


@dataclass(frozen=True)
class StudySizes:
    """Sizes of one study run, upper bounds where the data decide.

    Attributes
    ----------
    n_subjects : int
        Analysed subjects.
    n_channels : int
        Analysed channels (the first subject's, or ``analysis.channels``).
    n_freqs : int
        Frequencies of the grid.
    n_times : int
        Analysed time points (upper bound: the analysis window, else the epoch).
    n_map_times : int
        Time points of a subject's maps (the epoch window).
    n_conditions : int
        Conditions of the spec.
    n_contrasts : int
    permutations : int
        Rows of the permutation table (upper bound: exact tables can be smaller).
    n_shards : int
    """

    n_subjects: int
    n_channels: int
    n_freqs: int
    n_times: int
    n_map_times: int
    n_conditions: int
    n_contrasts: int
    permutations: int
    n_shards: int

    @property
    def n_points(self) -> int:
        """Tested points of one contrast (channels x frequencies x times)."""
        return self.n_channels * self.n_freqs * self.n_times

    @property
    def rows_per_shard(self) -> int:
        """Permutation-table rows of the largest shard."""
        return -(-self.permutations // self.n_shards)


@dataclass(frozen=True)
class RecordingSizes:
    """Sizes of one subject's input, read from headers only.

    Attributes
    ----------
    input_bytes : int
        Bytes of the subject's input files.
    n_channels : int
    n_epochs : int
        Epochs before rejection (events of the spec's conditions).
    n_samples : int
        Samples per epoch.
    sample_rate_hz : float
        Sampling rate, Hz.
    """

    input_bytes: int
    n_channels: int
    n_epochs: int
    n_samples: int
    sample_rate_hz: float


_CACHE: dict[int, tuple[object, StudySizes]] = {}


def study_sizes(plan) -> StudySizes:
    """The study's sizes (computed once per plan).

    Parameters
    ----------
    plan : famwise.plan.Plan
    """
    cached = _CACHE.get(id(plan))
    if cached is not None and cached[0] is plan:
        return cached[1]
    s = plan.study
    channels = s.analysis.channels or plan.first_subject_channels()
    n_channels = len(channels) if channels else FALLBACK_CHANNELS
    epoch_ms = s.epochs.window_ms
    if s.subjects.source == "epochs":
        first = recording_sizes(plan, plan.subjects[0])
        epoch_ms = (0.0, (first.n_samples - 1) * 1000.0 / first.sample_rate_hz)
    window_ms = s.analysis.time_ms or epoch_ms
    step_ms = s.decomposition.time_step_ms or 1000.0 / FALLBACK_SAMPLE_RATE_HZ
    sizes = StudySizes(
        n_subjects=len(plan.subjects),
        n_channels=n_channels,
        n_freqs=1 if s.decomposition.method == "none" else s.decomposition.frequencies.count,
        n_times=int((window_ms[1] - window_ms[0]) // step_ms) + 1,
        n_map_times=int((epoch_ms[1] - epoch_ms[0]) // step_ms) + 1,
        n_conditions=len(s.conditions),
        n_contrasts=len(s.contrasts),
        permutations=s.inference.permutations,
        n_shards=s.inference.shards,
    )
    _CACHE[id(plan)] = (plan, sizes)
    return sizes


def recording_sizes(plan, subject: str) -> RecordingSizes:
    """One subject's input sizes from file sizes, recording headers (EDF, BDF, `.vhdr`), events and NPZ headers.

    Parameters
    ----------
    plan : famwise.plan.Plan
    subject : str
        Subject id.
    """
    files = [Path(f) for f in plan.input_files(subject)]
    input_bytes = sum(f.stat().st_size for f in files if f.is_file())
    s = plan.study
    source = s.subjects.source
    from famwise.recordings import SUFFIXES, open_recording

    recording = next((f for f in files if f.suffix.lower() in SUFFIXES), None)
    if source == "bids" and recording is not None:
        signals = open_recording(recording, subject, headers_only=True).signals
        sample_rate_hz = max(signal.sample_rate_hz for signal in signals)
        labels = {label for group in s.conditions.values() for label in group}
        events = [f for f in files if f.name.endswith("_events.tsv")]
        n_epochs = _count_events(events[0], labels) if events else 0
        start_ms, stop_ms = s.epochs.window_ms
        n_samples = int(round((stop_ms - start_ms) * sample_rate_hz / 1000.0)) + 1
        return RecordingSizes(input_bytes, len(signals), n_epochs, n_samples, float(sample_rate_hz))
    if source == "epochs":
        n_epochs, n_channels, n_samples = _npz_shape(files[0], "data")
        with np.load(files[0], allow_pickle=False) as archive:
            sample_rate_hz = float(archive["sample_rate_hz"])
        return RecordingSizes(input_bytes, n_channels, n_epochs, n_samples, sample_rate_hz)
    # Maps given as input (or no recording yet): nothing to size but the files.
    return RecordingSizes(input_bytes, FALLBACK_CHANNELS, 0, 0, 0.0)


def _count_events(path: Path, labels: set[str]) -> int:
    with open(path, newline="", encoding="utf-8") as handle:
        return sum(1 for row in csv.DictReader(handle, delimiter="\t") if row.get("trial_type") in labels)


def _npz_shape(path: Path, key: str) -> tuple[int, ...]:
    """Shape of one array of an NPZ file, from its header (the data are not read)."""
    with zipfile.ZipFile(path) as archive, archive.open(f"{key}.npy") as member:
        version = np.lib.format.read_magic(member)
        read_header = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
        shape, _, _ = read_header(member)
    return shape


def _mem(nbytes: float) -> int:
    """MB to request for ``nbytes`` of arrays: base + safety margin, rounded up to 100 MB."""
    total = MEM_SAFETY * (BASE_MEM_MB + nbytes / MB)
    return int(math.ceil(total / 100.0) * 100)


def _minutes(operations: float, rate: float) -> int:
    """Wall-time minutes to request for ``operations`` at ``rate`` per second."""
    return max(MIN_RUNTIME_MIN, int(math.ceil(TIME_SAFETY * operations / rate / 60.0)))


# ---- per-subject decomposition ------------------------------------------------------


def _decompose_shape(plan, subject: str) -> tuple[RecordingSizes, int, int]:
    """(recording sizes, FFT length, tapers) of one subject's decomposition."""
    rec = recording_sizes(plan, subject)
    tf = plan.study.decomposition
    n_tapers = 1
    if tf.method == "multitaper":
        n_tapers = max(1, int(2 * tf.nw) - 1)
    # Zero padding for the longest kernel is at most one epoch (kernels that do not fit are refused).
    n_fft = 2 * rec.n_samples
    return rec, n_fft, n_tapers


def decompose_mem_mb(plan, subject: str) -> int:
    """Memory (MB) of one subject's decomposition.

    Input file + 2 x epochs (float64) + 2 x one FFT block + 2 x the condition maps.
    """
    rec, _, _ = _decompose_shape(plan, subject)
    sizes = study_sizes(plan)
    epochs = rec.n_epochs * rec.n_channels * rec.n_samples * 8
    maps = sizes.n_conditions * rec.n_channels * sizes.n_freqs * sizes.n_map_times * 8
    if plan.study.subjects.source == "maps":
        return _mem(3 * rec.input_bytes)
    return _mem(rec.input_bytes + 2 * epochs + 2 * BLOCK_BYTES + 2 * maps)


def decompose_runtime_min(plan, subject: str) -> int:
    """Wall time (minutes) of one subject's decomposition.

    One forward FFT per channel and ``5 n log2 n`` operations per inverse FFT
    per epoch, channel, frequency and taper.
    """
    rec, n_fft, n_tapers = _decompose_shape(plan, subject)
    if rec.n_epochs == 0:
        return MIN_RUNTIME_MIN
    per_fft = 5.0 * n_fft * math.log2(max(n_fft, 2))
    operations = rec.n_epochs * rec.n_channels * (1 + study_sizes(plan).n_freqs * n_tapers) * per_fft
    return _minutes(operations, FFT_RATE)


# ---- group stages ---------------------------------------------------------------------


def _contrast_bytes(sizes: StudySizes) -> int:
    """Bytes of one contrast's subject data (S x C x P float32)."""
    return sizes.n_subjects * sizes.n_conditions * sizes.n_points * 4


def contrast_data_mem_mb(plan) -> int:
    """Memory (MB) of gathering one contrast's subject maps: 3 x the maps (float64)."""
    sizes = study_sizes(plan)
    maps = sizes.n_subjects * sizes.n_conditions * sizes.n_channels * sizes.n_freqs * sizes.n_map_times * 8
    return _mem(3 * maps)


def observed_mem_mb(plan) -> int:
    """Memory (MB) of the observed statistics (also the null table's size): 8 x data + 16 maps."""
    sizes = study_sizes(plan)
    return _mem(8 * _contrast_bytes(sizes) + 16 * sizes.n_points * 8)


def group_runtime_min(plan) -> int:
    """Wall time (minutes) of a one-pass group stage (contrast data, observed, null info)."""
    sizes = study_sizes(plan)
    return _minutes(100.0 * sizes.n_subjects * sizes.n_conditions * sizes.n_points, NULL_RATE)


def null_shard_mem_mb(plan) -> int:
    """Memory (MB) of one permutation shard: 3 x data + ``NULL_BYTES_PER_POINT`` per point."""
    sizes = study_sizes(plan)
    return _mem(3 * _contrast_bytes(sizes) + NULL_BYTES_PER_POINT * sizes.n_points)


def null_shard_runtime_min(plan) -> int:
    """Wall time (minutes) of one permutation shard.

    Per row and point: one pass over the subjects for the statistic, and
    about 50 operations per cluster or TFCE collector (TFCE integrates over
    thresholds: 100).
    """
    sizes = study_sizes(plan)
    collectors = 0
    for correction in plan.study.inference.corrections:
        collectors += {"cluster": 50, "tfce": 100}.get(correction.method, 2)
    per_row = sizes.n_points * (sizes.n_subjects * sizes.n_conditions + collectors)
    return _minutes(sizes.rows_per_shard * per_row, NULL_RATE)


def _spatial(plan, correction: str) -> bool:
    """Whether a correction labels clusters of the observed map (cluster, TFCE)."""
    return plan.correction(correction).method in ("cluster", "tfce")


def correct_mem_mb(plan, correction: str) -> int:
    """Memory (MB) of one correction, for every contrast of its family.

    The observed and working maps (32 x P float64; 48 x P for cluster and TFCE,
    which label the observed map) + the merged null, one maximum per row and
    one count per point (4 x (rows + P) float64: the shards' copies and the
    merge).
    """
    sizes = study_sizes(plan)
    family = sizes.n_contrasts if plan.study.inference.family == "all-contrasts" else 1
    maps = (48 if _spatial(plan, correction) else 32) * sizes.n_points * 8
    null = 4 * (sizes.permutations + sizes.n_points) * 8
    return _mem(family * (maps + null))


def correct_runtime_min(plan, correction: str) -> int:
    """Wall time (minutes) of one correction: about 200 operations per point for
    cluster and TFCE (labelling, integration), 20 for the others (sorting), and
    20 per permutation row."""
    sizes = study_sizes(plan)
    family = sizes.n_contrasts if plan.study.inference.family == "all-contrasts" else 1
    per_point = 200.0 if _spatial(plan, correction) else 20.0
    return _minutes(family * (per_point * sizes.n_points + 20.0 * sizes.permutations), NULL_RATE)


def report_mem_mb(plan) -> int:
    """Memory (MB) of the report: every result map + ``FIGURE_MEM_MB`` for the figures."""
    sizes = study_sizes(plan)
    results = sizes.n_contrasts * len(plan.study.inference.corrections)
    return _mem(FIGURE_MEM_MB * MB + results * 16 * sizes.n_points * 8)


def report_runtime_min(plan) -> int:
    """Wall time (minutes) of the report: about 2 s of figures per result, at least the minimum."""
    results = study_sizes(plan).n_contrasts * len(plan.study.inference.corrections)
    return max(MIN_RUNTIME_MIN, int(math.ceil(TIME_SAFETY * 2.0 * results / 60.0)))


def small_mem_mb(plan) -> int:
    """Memory (MB) of the bookkeeping jobs (subjects table, channel graph): the base."""
    return _mem(0)


def small_runtime_min(plan) -> int:
    """Wall time (minutes) of the bookkeeping jobs: the minimum."""
    return MIN_RUNTIME_MIN


# ---- calibration (famwise calibrate) ---------------------------------------------------


def calibrate_shard_mem_mb(plan, settings) -> int:
    """Memory (MB) of one calibration shard: the contrast's data 3 times (kept, one null dataset, its
    statistic) and the null's working set. ``settings`` is the `famwise.settings.CalibrationSettings`."""
    sizes = study_sizes(plan)
    return _mem(3 * _contrast_bytes(sizes) + NULL_BYTES_PER_POINT * sizes.n_points)


def calibrate_shard_runtime_min(plan, settings) -> int:
    """Wall time (minutes) of one calibration shard: each of its datasets runs the whole permutation table,
    every row through every correction's collector (as :func:`power_shard_runtime_min`)."""
    sizes = study_sizes(plan)
    collectors = sum({"cluster": 50, "tfce": 100}.get(c.method, 2) for c in plan.study.inference.corrections)
    datasets = -(-settings.datasets // settings.shards)
    per_row = sizes.n_points * (sizes.n_subjects * sizes.n_conditions + collectors)
    return _minutes(datasets * (settings.nulls.permutations + 1) * per_row, NULL_RATE)


# ---- power simulation (famwise power) --------------------------------------------------


def power_shard_mem_mb(plan, settings) -> int:
    """Memory (MB) of one power shard: the pilot's data 3 times, a simulated study's 3 times, the null's working set.

    ``settings`` is the shard's `famwise.settings.PowerShardSettings`.
    """
    sizes = study_sizes(plan)
    study = settings.n * sizes.n_conditions * sizes.n_points * 4
    return _mem(3 * _contrast_bytes(sizes) + 3 * study + NULL_BYTES_PER_POINT * sizes.n_points)


def power_shard_runtime_min(plan, settings) -> int:
    """Wall time (minutes) of one power shard: each of its studies runs a whole permutation table of n subjects.

    As :func:`null_shard_runtime_min` per row, with every row computed (an upper
    bound: a correction's null may stop early, `famwise.power.sequential`).
    """
    sizes = study_sizes(plan)
    collectors = sum({"cluster": 50, "tfce": 100}.get(c.method, 2) for c in plan.study.inference.corrections)
    studies = -(-settings.studies // settings.shards)
    per_row = sizes.n_points * (settings.n * sizes.n_conditions + collectors)
    return _minutes(studies * (settings.nulls.permutations + 1) * per_row, NULL_RATE)
