"""Compare two runs' provenance records, per contrast and correction (``famwise compare``).

Every result (a contrast's statistics, each correction's arrays and tables)
is identical or different; for a different one the causes are named from
what went in: input files, spec settings, the seed or permutation count,
library versions. Different numbers from the same inputs, settings, seed,
permutations and versions are a reproducibility failure.
"""

import json
from dataclasses import dataclass, field

RESULT_PACKAGES = ("famwise", "numpy", "scipy", "numba")
"""Packages whose version can change the numbers (plotting and workflow packages cannot)."""

NEUTRAL_SETTINGS = frozenset({"name", "output", "inference.shards"})
"""Settings results do not depend on (the study's title, its output folder, how the permutations are split)."""


def _neutral(key: str) -> bool:
    """Whether no result depends on setting ``key``: :data:`NEUTRAL_SETTINGS` and the ``power`` section (planning only)."""
    return key in NEUTRAL_SETTINGS or key == "power" or key.startswith("power.")


NULL_METHODS = frozenset({"max-stat", "cluster", "tfce"})
"""Correction methods that read the permutation null."""

GRAPH_METHODS = frozenset({"cluster", "tfce"})
"""Correction methods that read the channel neighbor graph."""

STATISTICS = "statistics"
"""Name of a contrast's observed statistics among its results."""

MAX_LISTED = 3
"""Longest list of files or settings named in one line; the rest are counted."""


@dataclass(frozen=True)
class Differences:
    """What went into two runs and differs (values first -> second).

    Attributes
    ----------
    inputs : list of str
        One phrase per input file that differs (changed, or in one run only).
    settings : dict of str to (value, value)
        Spec settings by key path, seed and permutations excluded.
    seed, permutations : (value, value) or None
        When they differ.
    packages : dict of str to (str, str)
        Versions of :data:`RESULT_PACKAGES` that differ.
    """

    inputs: list[str]
    settings: dict[str, tuple]
    seed: tuple | None
    permutations: tuple | None
    packages: dict[str, tuple]


@dataclass(frozen=True)
class Outcome:
    """The comparison of one result.

    Attributes
    ----------
    contrast, result : str
        Contrast name; correction name or :data:`STATISTICS`.
    status : str
        ``"identical"``, ``"different"``, ``"only in first"`` or ``"only in second"``.
    detail : str
        For a different result: which of its arrays and tables differ.
    causes : list of str
        Differences of what went in that can explain a different result.
    failure : bool
        Different numbers from the same inputs, settings and versions.
    """

    contrast: str
    result: str
    status: str
    detail: str = ""
    causes: list[str] = field(default_factory=list)
    failure: bool = False


def _show(value) -> str:
    text = value if isinstance(value, str) else json.dumps(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _listed(phrases: list[str], noun: str) -> list[str]:
    if len(phrases) <= MAX_LISTED:
        return list(phrases)
    return phrases[:MAX_LISTED] + [f"{len(phrases) - MAX_LISTED} more {noun}"]


def input_differences(first: dict, second: dict) -> list[str]:
    """Phrases naming each input file that differs between two ``input_files`` mappings."""
    found = []
    for name in sorted(set(first) | set(second)):
        if name not in second:
            found.append(f"input {name} only in the first")
        elif name not in first:
            found.append(f"input {name} only in the second")
        elif first[name] != second[name]:
            found.append(f"input {name} changed")
    return found


def differences(first: dict, second: dict) -> Differences:
    """What went into two runs and differs, from their provenance records."""
    a, b = first["spec_settings"], second["spec_settings"]
    missing = object()
    settings = {
        key: (a.get(key, missing), b.get(key, missing))
        for key in sorted(set(a) | set(b))
        if a.get(key, missing) != b.get(key, missing) and key not in ("seed", "inference.permutations")
    }
    settings = {key: tuple("(unset)" if v is missing else v for v in pair) for key, pair in settings.items()}
    packages = {
        name: (first["packages"].get(name, "(none)"), second["packages"].get(name, "(none)"))
        for name in RESULT_PACKAGES
        if first["packages"].get(name) != second["packages"].get(name)
    }
    return Differences(
        inputs=input_differences(first["input_files"], second["input_files"]),
        settings=settings,
        seed=_changed(first, second, "seed"),
        permutations=_changed(first, second, "permutations"),
        packages=packages,
    )


def _changed(first: dict, second: dict, key: str) -> tuple | None:
    return (first[key], second[key]) if first[key] != second[key] else None


@dataclass(frozen=True)
class _Result:
    """Which result a cause may explain: contrast, result name, the correction's methods and family."""

    contrast: str
    name: str
    methods: frozenset
    pvalues: frozenset
    joint: bool

    @property
    def uses_null(self) -> bool:
        return bool(self.methods & NULL_METHODS) or "permutation" in self.pvalues


def _relevant(key: str, result: _Result) -> bool:
    """Whether setting ``key`` can change ``result``."""
    if _neutral(key):
        return False
    if key.startswith("inference.corrections["):
        return key.startswith(f"inference.corrections[{result.name}].")
    if key.startswith("contrasts["):
        return result.joint or key.startswith(f"contrasts[{result.contrast}].")
    if key.startswith("channels."):  # the neighbor graph
        return bool(result.methods & GRAPH_METHODS)
    return not (result.name == STATISTICS and key in ("inference.alpha", "inference.family"))


def _result(first: dict, second: dict, contrast: str, name: str) -> _Result:
    """What the two records' settings say about one result (a correction's method may differ between them)."""
    settings = (first["spec_settings"], second["spec_settings"])

    def values(field: str) -> frozenset:
        if name == STATISTICS:
            return frozenset()
        return frozenset(s.get(f"inference.corrections[{name}].{field}") for s in settings) - {None}

    joint = "all-contrasts" in {s.get("inference.family") for s in settings}
    return _Result(contrast, name, values("method"), values("pvalues"), joint)


def causes_of(found: Differences, result: _Result) -> list[str]:
    """Phrases naming what went in differently and can change this result.

    Inputs, settings (those of this contrast and correction, the channel
    graph's for cluster and TFCE results, and the ones every result depends
    on), the seed and permutation count (results of the permutation null
    only) and the versions of :data:`RESULT_PACKAGES`.
    """
    causes = _listed(found.inputs, "input files")
    settings = [f"{key} {_show(a)} -> {_show(b)}" for key, (a, b) in found.settings.items() if _relevant(key, result)]
    causes += _listed(settings, "settings")
    if result.uses_null and found.seed:
        causes.append(f"seed {found.seed[0]} -> {found.seed[1]}")
    if result.uses_null and found.permutations:
        causes.append(f"permutations {found.permutations[0]} -> {found.permutations[1]}")
    return causes + [f"{name} {a} -> {b}" for name, (a, b) in found.packages.items()]


def _detail(a: dict, b: dict, result: str) -> str:
    if result == STATISTICS:
        return ", ".join(sorted(k for k in set(a) | set(b) if a.get(k) != b.get(k))) + " differ"
    arrays, tables = (a["arrays"], b["arrays"]), (a.get("tables", {}), b.get("tables", {}))
    other = sorted(
        k
        for k in set(arrays[0]) | set(arrays[1])
        if k not in ("mask", "n_significant") and arrays[0].get(k) != arrays[1].get(k)
    )
    other += sorted(k for k in set(tables[0]) | set(tables[1]) if tables[0].get(k) != tables[1].get(k))
    if arrays[0].get("mask") == arrays[1].get("mask"):
        mask = "mask identical"
    else:
        mask = f"mask differs, {a.get('n_significant', '?')} -> {b.get('n_significant', '?')} points"
    return mask + (f"; {', '.join(other)} differ" if other else "")


def _entries(record: dict) -> dict[tuple[str, str], dict]:
    found = {}
    for contrast, entry in record["results"].items():
        found[(contrast, STATISTICS)] = entry["statistics"]
        found.update({(contrast, name): item for name, item in entry["corrections"].items()})
    return found


def compare_records(first: dict, second: dict) -> tuple[list[Outcome], Differences]:
    """Compare every result of two provenance records (checked by ``read_record``).

    Returns
    -------
    outcomes : list of Outcome
        One per result of either record, in the first record's order.
    found : Differences
        What went in differently.
    """
    found = differences(first, second)
    a, b = _entries(first), _entries(second)
    outcomes = []
    for key in [*a, *(k for k in b if k not in a)]:
        contrast, result = key
        if key not in b or key not in a:
            outcomes.append(Outcome(contrast, result, "only in first" if key in a else "only in second"))
            continue
        if a[key] == b[key]:
            outcomes.append(Outcome(contrast, result, "identical"))
            continue
        causes = causes_of(found, _result(first, second, contrast, result))
        outcomes.append(
            Outcome(contrast, result, "different", _detail(a[key], b[key], result), causes, failure=not causes)
        )
    return outcomes, found


FAILURE = (
    "DIFFERENT NUMBERS from the same inputs, settings, seed, permutations and library versions: "
    "a reproducibility failure (please report it with both records)"
)


def _line(outcome: Outcome) -> str:
    name = f"{outcome.contrast}/{outcome.result}"
    if outcome.status != "different":
        return f"{name}: {outcome.status}"
    why = FAILURE if outcome.failure else "; ".join(outcome.causes)
    return f"{name}: different ({outcome.detail}): {why}"


def comparison_text(
    outcomes: list[Outcome], found: Differences, *, first: tuple[str, dict], second: tuple[str, dict]
) -> str:
    """A few lines for an e-mail: fingerprints, one line per contrast's identical results,
    one per other result, notes on settings that cannot change results, a verdict.

    ``first`` and ``second`` are (label, record); values are shown first -> second.
    """
    prints = [record.get("results_fingerprint", "?")[:12] for _, record in (first, second)]
    lines = [f"famwise compare: {first[0]} -> {second[0]}", f"results fingerprint: {prints[0]} -> {prints[1]}"]
    for contrast in dict.fromkeys(o.contrast for o in outcomes):
        same = [o.result for o in outcomes if o.contrast == contrast and o.status == "identical"]
        if same:
            lines.append(f"{contrast}: {', '.join(same)}: identical")
        lines += [_line(o) for o in outcomes if o.contrast == contrast and o.status != "identical"]
    neutral = [f"{key} {_show(a)} -> {_show(b)}" for key, (a, b) in found.settings.items() if _neutral(key)]
    if neutral:
        lines.append(f"note: {'; '.join(neutral)} (results do not depend on these)")
    differ = sum(o.status != "identical" for o in outcomes)
    failures = sum(o.failure for o in outcomes)
    if not differ:
        lines.append(f"all {len(outcomes)} results identical")
    else:
        lines.append(
            f"{differ} of {len(outcomes)} results differ"
            + (f"; {failures} of them a REPRODUCIBILITY FAILURE" if failures else "")
        )
    return "\n".join(lines)
