"""Provenance of a run: what was run, on what, with which software.

A collaborator who reruns the same spec on the same inputs gets the same
file apart from the start and end times; any change of the spec, an input
file, a package version or a result shows up in it, and ``famwise compare``
names which (see ``famwise.handoff.compare``).
"""

import hashlib
import json
from importlib import metadata
from pathlib import Path

from famwise.errors import UserError
from famwise.figure_style import write_atomic
from famwise.report.result_hashes import result_hashes, results_fingerprint

PACKAGES = ("famwise", "numpy", "scipy", "numba", "snakemake", "matplotlib", "pydantic")
"""Packages whose versions are recorded (those not installed are left out)."""

TIMESTAMP_KEYS = ("started", "finished")
"""Keys of the provenance record that may differ between identical runs."""


def package_versions() -> dict[str, str]:
    """Installed versions of :data:`PACKAGES`, by name."""
    versions = {}
    for name in PACKAGES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return versions


def canonical_json(study: dict) -> str:
    """The study as JSON with sorted keys and no spacing: the text that is fingerprinted."""
    return json.dumps(study, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def spec_fingerprint(study: dict) -> str:
    """SHA-256 (hex) of :func:`canonical_json` of the study."""
    return hashlib.sha256(canonical_json(study).encode("utf-8")).hexdigest()


def file_sha256(path: Path) -> str:
    """SHA-256 (hex) of a file's bytes, read in blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _label(path: Path, root: Path | None) -> str:
    if root is not None:
        try:
            return Path(path).resolve().relative_to(Path(root).resolve()).as_posix()
        except ValueError:
            pass
    return Path(path).as_posix()


def spec_settings(study: dict) -> dict:
    """Every setting of the study by its key path, e.g. ``inference.corrections[holm].level``.

    Mappings are walked key by key; a list of sections (contrasts,
    corrections) is keyed by each item's name (a correction without one by
    its method), so that a comparison names the setting that differs.
    Other values, lists of values included, are leaves.
    """
    flat = {}

    def walk(prefix: str, value) -> None:
        if isinstance(value, dict) and value:
            for key, item in value.items():
                walk(f"{prefix}.{key}" if prefix else str(key), item)
        elif isinstance(value, list) and value and all(isinstance(item, dict) for item in value):
            for index, item in enumerate(value):
                walk(f"{prefix}[{item.get('name') or item.get('method') or index}]", item)
        else:
            flat[prefix] = value

    walk("", study)
    return flat


def write_provenance(
    path: Path,
    *,
    spec_text: str,
    study: dict,
    input_files: list[Path] | dict[str, Path],
    started: str | None,
    finished: str | None,
    root: Path | None = None,
    output_dir: Path | None = None,
) -> dict:
    """Write ``provenance.json`` and return its content.

    Parameters
    ----------
    path : Path
        File to write (atomically).
    spec_text : str
        The spec file's text as the user wrote it.
    study : dict
        The validated spec as JSON (``model_dump(mode="json")``); its
        canonical JSON is fingerprinted.
    input_files : list of Path, or dict of str to Path
        Files the run read (subject data, channel position and edge files);
        each is hashed (SHA-256). A mapping gives each file's name as the
        spec names it (see ``famwise.handoff.inputs.study_files``).
    started, finished : str or None
        Start and end times (ISO 8601, UTC).
    root : Path, optional
        Input paths given as a list are recorded relative to this folder
        (normally the spec's folder) so the record does not depend on where
        the study lives.
    output_dir : Path, optional
        The run's output folder; when given, the hash of every result array
        and cluster table (see :func:`famwise.report.result_hashes.result_hashes`)
        and their fingerprint are recorded too.

    Returns
    -------
    dict
        What was written.
    """
    if not isinstance(input_files, dict):
        input_files = {_label(p, root): p for p in input_files}
    for file in input_files.values():
        if not Path(file).is_file():
            raise UserError(f"provenance: expected the input file {file} of this run, found no such file")
    inference = study.get("inference", {}) or {}
    record = {
        "spec_fingerprint": spec_fingerprint(study),
        "spec_settings": spec_settings(study),
        "spec_text": spec_text,
        "seed": study.get("seed"),
        "permutations": inference.get("permutations"),
        "packages": package_versions(),
        "input_files": {
            name: {"sha256": file_sha256(p), "bytes": Path(p).stat().st_size} for name, p in sorted(input_files.items())
        },
        "started": started,
        "finished": finished,
    }
    if output_dir is not None:
        record["results"] = result_hashes(output_dir, study)
        record["results_fingerprint"] = results_fingerprint(record["results"])
    text = json.dumps(record, indent=2, sort_keys=False, ensure_ascii=False) + "\n"
    write_atomic(Path(path), text.encode("utf-8"))
    return record
