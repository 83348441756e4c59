"""Simulated studies from a pilot's maps: resampled residuals plus a known effect.

Each subject's residual map is the subject's map minus what the design
explains in the pilot (one-sample, paired, weighted: the group mean;
two-sample, between-groups: the subject's group mean; correlation: the
per-point least-squares line in the covariate; regression: the full model's
fit, intercept, tested and nuisance covariates; repeated measures: each
condition's mean). Designs that test one map per subject (weighted sums,
the group x condition interaction) are resampled as that map. A simulated
study of N participants draws N residual maps with replacement (two-sample,
between-groups: within each group, N split in the pilot's proportions;
correlation, regression: residual maps together with their subject's
covariate row, nuisance columns included), which keeps the pilot's
smoothness over channels, frequencies and times and its spread between
subjects, and adds a known effect that is zero outside the effect region.

One-sample, paired, weighted, between-groups and regression residuals are
also given a random sign. The sign-flip test assumes noise symmetric about
zero, and the skew of a few pilot subjects' empirical distribution is mostly
sampling noise that would otherwise make the simulated error rates depend on
it (with zero effect, a 60-subject smooth Gaussian pilot gave a max-statistic
FWER of 0.063 at n = 12 without the sign and 0.047 with it, 300 studies
each). A subject drawn twice is, for a label or Freedman-Lane permutation, a
pair of identical residuals tied to one group or covariate row, which the
permutations do not reproduce; the sign makes such copies uncorrelated (with
zero effect and 400 studies of n = 16 from a 45-subject pilot, the
between-groups max-statistic FWER was 0.09 and 0.10 without the sign, 0.06
with it; regression with three nuisance columns 0.16 and 0.20 without, 0.09
and 0.10 with it, and 0.065 at n = 30: Freedman-Lane is approximate with few
residual degrees of freedom and repeated high-leverage rows, so small-N power
of such regressions is optimistic). Two-sample and correlation residuals
keep their sign, as before (0.06, 0.06 and 0.07 in the same check).

Residuals are multiplied by sqrt(n / (n - q)) (q = 1 per estimated mean, 2
for a line, p for a regression of p parameters), so that the variance of a
resampled residual equals the pilot's unbiased variance (Davison & Hinkley
1997, section 6.2, modified residuals).

A regression resample whose covariate rows do not determine the model (the
tested covariate constant, or collinear columns, e.g. a category nobody
drawn belongs to) is drawn again from the same random stream, up to
`MAX_DRAWS` times.

References
----------
Davison AC, Hinkley DV (1997). Bootstrap Methods and their Application.
Cambridge University Press.
"""

from dataclasses import dataclass

import numpy as np

from famwise.axes import is_voltage
from famwise.design import ContrastData
from famwise.errors import UserError
from famwise.stats.regression import collinear_columns, design_matrix

MAX_DRAWS = 1000
"""Draws of one regression study's subjects before a rank-deficient design is an error."""


@dataclass(frozen=True)
class Pilot:
    """The pilot's residual maps and observed effect.

    Attributes
    ----------
    test : str
    residuals : ndarray of float64, (n, P) or (n, k, P) for repeated measures
    effect : ndarray of float64, (P,), (g, P) for between-groups or (k, P)
        The observed effect: mean (one-sample, paired, weighted), first
        minus second group mean (two-sample), each group's mean minus the
        size-weighted mean of the group means (between-groups), slope per
        covariate unit (correlation, regression: the tested coefficient),
        condition means minus their grand mean (repeated measures).
    spread : ndarray of float64, (P,)
        Unbiased SD of the residuals (two-sample, between-groups: pooled
        within groups), the unit of d.
    groups : ndarray of int (n,) or None
    covariate : ndarray of float64 (n,) or None
    nuisance : ndarray of float64 (n, q) or None
        Regression: the coded nuisance columns.
    fit : ndarray of float64 (n, P) or None
        Regression: the full model's fit without the tested term, b0 + N g.
    """

    test: str
    residuals: np.ndarray
    effect: np.ndarray
    spread: np.ndarray
    groups: np.ndarray | None = None
    covariate: np.ndarray | None = None
    nuisance: np.ndarray | None = None
    fit: np.ndarray | None = None


@dataclass(frozen=True)
class SimulatedStudy:
    """One simulated study: maps float32 (n, P) or (n, k, P), and the design's per-subject columns (or None)."""

    x: np.ndarray
    groups: np.ndarray | None = None
    covariate: np.ndarray | None = None
    nuisance: np.ndarray | None = None


def pilot_from(data: ContrastData) -> Pilot:
    """Residual maps and observed effect of one contrast's pilot data."""
    x = np.asarray(data.x, dtype=np.float64)
    n = x.shape[0]
    if data.test in ("one-sample", "paired", "weighted"):
        mean = x.mean(axis=0)
        residuals = (x - mean) * np.sqrt(n / (n - 1))
        return Pilot(data.test, residuals, mean, x.std(axis=0, ddof=1))
    if data.test in ("two-sample", "between-groups"):
        return _groups_pilot(data.test, x, np.asarray(data.groups, dtype=np.int64))
    if data.test == "correlation":
        c = np.asarray(data.covariate, dtype=np.float64)
        cc = c - c.mean()
        xc = x - x.mean(axis=0)
        slope = cc @ xc / (cc @ cc)
        residuals = (xc - np.outer(cc, slope)) * np.sqrt(n / (n - 2))
        return Pilot(data.test, residuals, slope, residuals.std(axis=0, ddof=0), covariate=c)
    if data.test == "regression":
        return _regression_pilot(x, np.asarray(data.covariate, dtype=np.float64), data.nuisance)
    if data.test != "repeated-measures":
        raise UserError(
            f"power: contrasts with test '{data.test}' cannot be simulated yet; list the others in power.contrasts"
        )
    means = x.mean(axis=0)
    residuals = (x - means) * np.sqrt(n / (n - 1))
    return Pilot(data.test, residuals, means - means.mean(axis=0), residuals.std(axis=(0, 1), ddof=0))


def _groups_pilot(test: str, x: np.ndarray, groups: np.ndarray) -> Pilot:
    """Residuals about each group's mean; two-sample effect: first minus second mean, else means about their mean."""
    n = x.shape[0]
    residuals = np.empty_like(x)
    means = []
    for g in range(int(groups.max()) + 1):
        part = x[groups == g]
        if part.shape[0] < 2:
            raise UserError(
                f"power: group {g + 1} of the pilot has {part.shape[0]} subject(s); resampling needs at least 2"
            )
        means.append(part.mean(axis=0))
        residuals[groups == g] = (part - means[g]) * np.sqrt(part.shape[0] / (part.shape[0] - 1))
    means = np.stack(means)
    pooled = np.sqrt(np.sum((x - means[groups]) ** 2, axis=0) / (n - means.shape[0]))
    if test == "two-sample":
        return Pilot(test, residuals, means[0] - means[1], pooled, groups=groups)
    share = np.bincount(groups) / n
    return Pilot(test, residuals, means - share @ means, pooled, groups=groups)


def _regression_pilot(x: np.ndarray, covariate: np.ndarray, nuisance) -> Pilot:
    """Residuals of the full model [1, c, N]; effect: the tested coefficient b1 (map unit per covariate unit)."""
    n = x.shape[0]
    nuisance = np.zeros((n, 0)) if nuisance is None else np.asarray(nuisance, dtype=np.float64).reshape(n, -1)
    design = design_matrix(covariate, nuisance)
    beta, _, _, _ = np.linalg.lstsq(design, x, rcond=None)
    raw = x - design @ beta
    df = n - design.shape[1]
    fit = design @ beta - np.outer(covariate, beta[1])
    spread = np.sqrt(np.sum(raw**2, axis=0) / df)
    residuals = raw * np.sqrt(n / df)
    return Pilot("regression", residuals, beta[1], spread, covariate=covariate, nuisance=nuisance, fit=fit)


def effect_map(pilot: Pilot, *, source: str, size: float, region: np.ndarray) -> np.ndarray:
    """The true effect of the simulated studies: zero outside ``region``.

    Parameters
    ----------
    pilot : Pilot
    source : {"pilot", "specified"}
    size : float
        Factor on the pilot's observed effect ("pilot"), or the standardised
        size ("specified"): d in units of ``pilot.spread`` (one-sample,
        paired, weighted: d_z; two-sample: d over the pooled SD), Pearson's
        r (correlation) or the partial correlation of the tested covariate
        given the nuisance covariates (regression), |r| < 1, or Cohen's f
        (between-groups; Cohen 1988, section 8.2): group means equally
        spaced in the groups' listed order, their SD (weighted by the
        pilot's group shares) f times the pooled SD.
    region : ndarray of bool, (P,)

    Returns
    -------
    ndarray of float64, shape of ``pilot.effect``
        Added to every simulated subject (one-sample, paired, weighted), to
        the first group (two-sample), to each group its row
        (between-groups), as slope times the centred covariate
        (correlation) or as the tested coefficient times the covariate
        (regression), or per condition (repeated measures).
    """
    if source == "pilot":
        return np.where(region, size * pilot.effect, 0.0)
    if pilot.test == "repeated-measures":
        raise UserError(
            "power.effect.source: 'specified' is not defined for repeated-measures contrasts; use source 'pilot'"
        )
    if pilot.test in ("correlation", "regression"):
        if not -1 < size < 1:
            name = "Pearson's r" if pilot.test == "correlation" else "the partial correlation r"
            raise UserError(
                f"power.effect.d: for a {pilot.test} contrast the size is {name}, strictly between -1 and 1; got {size:g}"
            )
        slope = size / np.sqrt(1 - size**2) * pilot.spread / np.std(_tested_direction(pilot))
        return np.where(region, slope, 0.0)
    if pilot.test == "between-groups":
        return np.where(region, np.outer(_spaced_means(pilot.groups), size * pilot.spread), 0.0)
    return np.where(region, size * pilot.spread, 0.0)


def _tested_direction(pilot: Pilot) -> np.ndarray:
    """The covariate with the intercept and the nuisance columns projected out (n,)."""
    n = pilot.covariate.shape[0]
    reduced = np.column_stack([np.ones(n)] + ([] if pilot.nuisance is None else [pilot.nuisance]))
    coefficients, _, _, _ = np.linalg.lstsq(reduced, pilot.covariate, rcond=None)
    return pilot.covariate - reduced @ coefficients


def _spaced_means(groups: np.ndarray) -> np.ndarray:
    """Equally spaced group means (g,), centred and of unit SD when weighted by the groups' shares."""
    share = np.bincount(groups) / groups.size
    spaced = np.arange(share.size, dtype=np.float64)
    spaced -= share @ spaced
    return spaced / np.sqrt(share @ spaced**2)


def simulate_study(pilot: Pilot, effect: np.ndarray, n: int, rng: np.random.Generator) -> SimulatedStudy:
    """One simulated study of ``n`` participants (groups: 0 for the first group's subjects, and so on)."""
    r = pilot.residuals
    if pilot.test in ("two-sample", "between-groups"):
        sizes = group_sizes(pilot.groups, n)
        parts = []
        for g, size in enumerate(sizes):
            members = np.flatnonzero(pilot.groups == g)
            added = effect[g] if pilot.test == "between-groups" else effect if g == 0 else 0.0
            signs = 1 - 2 * rng.integers(0, 2, size) if pilot.test == "between-groups" else np.ones(size, np.int64)
            parts.append(signs[:, None] * r[members[rng.integers(0, members.size, size)]] + added)
        labels = np.repeat(np.arange(len(sizes)), sizes)
        return SimulatedStudy(np.concatenate(parts).astype(np.float32), groups=labels)
    if pilot.test == "regression":
        return _regression_study(pilot, effect, n, rng)
    chosen = rng.integers(0, r.shape[0], n)
    if pilot.test == "correlation":
        c = pilot.covariate[chosen]
        x = r[chosen] + np.outer(c - pilot.covariate.mean(), effect)
        return SimulatedStudy(x.astype(np.float32), covariate=c)
    if pilot.test in ("one-sample", "paired", "weighted"):
        signs = (1 - 2 * rng.integers(0, 2, n)).astype(np.float64)
        return SimulatedStudy((signs[:, None] * r[chosen] + effect).astype(np.float32))
    return SimulatedStudy((r[chosen] + effect).astype(np.float32))


def _regression_study(pilot: Pilot, effect: np.ndarray, n: int, rng: np.random.Generator) -> SimulatedStudy:
    """Subjects drawn with their covariate rows; redrawn while the design does not determine the model."""
    parameters = 2 + pilot.nuisance.shape[1]
    if n <= parameters:
        raise UserError(
            f"power.sample_sizes: N = {n} leaves no degrees of freedom for the regression's {parameters} "
            "parameters (intercept, tested covariate, nuisance columns); use larger sample sizes"
        )
    for _ in range(MAX_DRAWS):
        chosen = rng.integers(0, pilot.residuals.shape[0], n)
        c, nuisance = pilot.covariate[chosen], pilot.nuisance[chosen]
        if np.ptp(c) > 0 and collinear_columns(design_matrix(c, nuisance)) is None:
            signs = 1 - 2 * rng.integers(0, 2, n)
            x = pilot.fit[chosen] + np.outer(c, effect) + signs[:, None] * pilot.residuals[chosen]
            return SimulatedStudy(x.astype(np.float32), covariate=c, nuisance=nuisance)
    raise UserError(
        f"power.sample_sizes: {MAX_DRAWS} draws of N = {n} pilot subjects all gave a rank-deficient regression "
        "design (a constant or collinear covariate column); use larger sample sizes"
    )


def group_sizes(groups: np.ndarray, n: int) -> list[int]:
    """Group sizes among ``n`` in the pilot's proportions, each at least 2 (largest remainders; two groups: rounded)."""
    counts = np.bincount(groups)
    k = counts.size
    if n < 2 * k:
        raise UserError(f"power.sample_sizes: N = {n} is too small for {k} groups of at least 2 subjects each")
    if k == 2:
        first = split_groups(groups, n)
        return [first, n - first]
    ideal = counts / counts.sum() * n
    sizes = np.maximum(np.floor(ideal), 2).astype(np.int64)
    while sizes.sum() > n:  # the minimum of 2 took subjects from the others: the largest group gives them back
        sizes[np.argmax(sizes)] -= 1
    order = np.argsort(-(ideal - sizes), kind="stable")
    sizes[order[: n - sizes.sum()]] += 1
    return [int(s) for s in sizes]


def split_groups(groups: np.ndarray, n: int) -> int:
    """Size of the first group among ``n``, in the pilot's proportion (each group at least 2)."""
    share = np.count_nonzero(groups == 0) / groups.size
    return int(min(max(round(n * share), 2), n - 2))


def region_mask(data: ContrastData, *, channels=None, freq_hz=None, time_ms=None) -> np.ndarray:
    """Bool (P,) over the contrast's points: inside the channels, band and window (each optional; no band for voltage).

    Raises UserError naming the ``power.effect`` key when a part selects nothing.
    """
    keep_c = np.ones(len(data.channels), dtype=bool)
    if channels is not None:
        unknown = [c for c in channels if c not in data.channels]
        if unknown:
            raise UserError(
                f"power.effect.channels: {', '.join(unknown)} not among the analysed channels "
                f"({', '.join(data.channels)})"
            )
        keep_c = np.isin(np.array(data.channels), channels)
    if freq_hz is not None and is_voltage(data.freqs):
        raise UserError("power.effect.freq_hz: voltage maps have no frequency axis; leave freq_hz out")
    keep_f = _within(np.asarray(data.freqs), freq_hz, "power.effect.freq_hz", "Hz", 1.0)
    keep_t = _within(np.asarray(data.times), time_ms, "power.effect.time_ms", "ms", 1000.0)
    return (keep_c[:, None, None] & keep_f[None, :, None] & keep_t[None, None, :]).reshape(-1)


def _within(values: np.ndarray, window, key: str, unit: str, factor: float) -> np.ndarray:
    if window is None:
        return np.ones(values.size, dtype=bool)
    scaled = values * factor
    keep = (scaled >= window[0] - 1e-9) & (scaled <= window[1] + 1e-9)
    if not keep.any():
        raise UserError(
            f"{key}: [{window[0]:g}, {window[1]:g}] {unit} holds none of the analysed values "
            f"({scaled.min():g} to {scaled.max():g} {unit})"
        )
    return keep
