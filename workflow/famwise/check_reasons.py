"""Why `famwise check` says a job would run: Snakemake's reasons in a few words, and the settings that changed."""

import json
from pathlib import Path

# Spec sections each rule's settings come from (the report depends on everything).
_SECTIONS = {
    "decompose": ("subjects", "conditions", "epochs", "decomposition"),
    "subjects_table": ("subjects", "conditions"),
    "channel_graph": ("channels", "analysis", "subjects"),
    "contrast_data": ("contrasts", "analysis", "subjects"),
    "observed": ("inference",),
    "null": ("inference", "seed", "contrasts"),
    "family": ("inference", "seed", "contrasts"),
    "correct": ("inference", "contrasts"),
}

_SHORT = {
    "Missing output files": "no result yet",
    "Input files updated by another job": "an input is remade first",
    "Updated input files": "an input file changed",
    "Set of input files has changed since last execution": "the set of input files changed",
    "Code has changed since last execution": "the job's code changed",
    "Software environment definition has changed since last execution": "the software environment changed",
    "Incomplete output files": "an earlier run was interrupted",
    "Forced execution": "forced",
}


def _flatten(value, prefix: str = "") -> dict[str, object]:
    if isinstance(value, dict):
        flat = {}
        for key, item in value.items():
            flat.update(_flatten(item, f"{prefix}.{key}" if prefix else str(key)))
        return flat
    return {prefix: value}


def changed_settings(output: Path, study: dict) -> list[str]:
    """``key old -> new`` for every spec value that differs from the last finished run's ``study.json``."""
    path = Path(output) / "study.json"
    if not path.is_file():
        return []
    before, now = _flatten(json.loads(path.read_text(encoding="utf-8"))), _flatten(study)
    return [
        f"{key} {json.dumps(before.get(key))} -> {json.dumps(now.get(key))}"
        for key in sorted(set(before) | set(now))
        if before.get(key) != now.get(key)
    ]


def describe_reasons(rule: str, reasons: set[str], changes: list[str]) -> str:
    """Snakemake's reasons for one rule's jobs as one short phrase each, joined."""
    phrases = []
    for reason in sorted(reasons):
        head = reason.split(":", 1)[0].strip()
        if head.startswith("Params have changed"):
            sections = next((s for prefix, s in _SECTIONS.items() if rule.startswith(prefix)), None)
            relevant = [c for c in changes if sections is None or c.split(".", 1)[0].split(" ", 1)[0] in sections]
            phrase = "settings changed" + (f": {', '.join(relevant)}" if relevant else "")
        else:
            phrase = _SHORT.get(head, head)
        if phrase not in phrases:
            phrases.append(phrase)
    return "; ".join(phrases)
