"""The hand-off manifest: every file a packed study reads, with its size and SHA-256.

``famwise pack`` writes it beside the spec as ``<spec stem>.manifest.json``;
on the receiving side ``famwise check`` and ``famwise run`` verify it before
anything runs and name every missing or changed file.
"""

import json
from pathlib import Path

from famwise import __version__
from famwise.errors import UserError
from famwise.handoff.inputs import StudyFiles
from famwise.report.provenance import file_sha256

FORMAT = 1
"""Version of the manifest format."""

MAX_NAMED = 5
"""Most files one error message names; the rest are counted."""


def manifest_path(spec: Path) -> Path:
    """Where the manifest of ``spec`` sits: ``study.yaml`` -> ``study.manifest.json`` beside it."""
    spec = Path(spec)
    return spec.with_name(f"{spec.stem}.manifest.json")


def file_entry(path: Path, role: str) -> dict:
    """A manifest entry: role (``"channels"`` or ``"data"``), size in bytes, SHA-256 (hex)."""
    return {"role": role, "bytes": Path(path).stat().st_size, "sha256": file_sha256(path)}


def build_manifest(spec: Path, files: StudyFiles, *, data_included: bool) -> dict:
    """The manifest of a study: its spec's hash and an entry per file, named as the spec names it."""
    entries = {name: file_entry(p, "channels") for name, p in files.channel_files.items()}
    entries |= {name: file_entry(p, "data") for name, p in files.data_files.items()}
    return {
        "famwise_manifest": FORMAT,
        "famwise": __version__,
        "spec": Path(spec).name,
        "spec_sha256": file_sha256(spec),
        "data_included": data_included,
        "files": entries,
    }


def _read(path: Path) -> dict:
    try:
        manifest = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as error:
        raise UserError(f"{path}: not a famwise manifest ({error})") from None
    if not isinstance(manifest, dict):
        manifest = {}
    files = manifest.get("files")
    if (
        manifest.get("famwise_manifest") != FORMAT
        or not isinstance(files, dict)
        or not all(isinstance(e, dict) and {"bytes", "sha256"} <= set(e) for e in files.values())
    ):
        raise UserError(f"{path}: not a famwise manifest (format {FORMAT} with 'files' sizes and hashes)")
    return manifest


def _problem(path: Path, entry: dict) -> str | None:
    if not path.is_file():
        return "missing"
    size = path.stat().st_size
    if size != entry["bytes"]:
        return f"changed ({size} bytes, packed {entry['bytes']})"
    if file_sha256(path) != entry["sha256"]:
        return "changed (same size, other content)"
    return None


def verify_manifest(spec: Path) -> tuple[str, list[str]] | None:
    """Check the files of the manifest beside ``spec`` against their sizes and hashes.

    Returns
    -------
    (str, list of str) or None
        None when no manifest sits beside the spec; else a one-line
        confirmation and warnings (the spec was edited after packing).

    Raises
    ------
    UserError
        Naming every missing or changed file (up to :data:`MAX_NAMED`).
    """
    spec = Path(spec)
    path = manifest_path(spec)
    if not path.is_file():
        return None
    manifest = _read(path)
    folder = spec.resolve().parent
    problems = []
    for name, entry in manifest["files"].items():
        problem = _problem(folder / name, entry)
        if problem:
            problems.append(f"{name} {problem}")
    if problems:
        named = "; ".join(problems[:MAX_NAMED]) + (
            f"; and {len(problems) - MAX_NAMED} more" if len(problems) > MAX_NAMED else ""
        )
        raise UserError(
            f"{path.name}: {len(problems)} of {len(manifest['files'])} files differ from the packed study: "
            f"{named}. Get these files as they were packed (or remove {path.name} to run on the files you have)"
        )
    warnings = []
    if spec.is_file() and file_sha256(spec) != manifest.get("spec_sha256"):
        warnings.append(f"{spec.name} was edited after it was packed; results may differ from the sender's")
    return f"the {len(manifest['files'])} files listed in {path.name} are as packed (sizes and SHA-256)", warnings
