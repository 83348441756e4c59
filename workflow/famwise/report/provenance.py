"""Provenance of a run: what was run, on what, with which software.

A collaborator who reruns the same spec on the same inputs gets the same
file apart from the start and end times; any change of the spec, an input
file or a package version shows up in it.
"""

import hashlib
import json
from importlib import metadata
from pathlib import Path

import numpy as np

from famwise.errors import UserError
from famwise.report.results import correction_entries
from famwise.figure_style import write_atomic

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


def mask_hashes(output_dir: Path, study: dict) -> dict[str, dict]:
    """SHA-256 of every stored significance mask, by ``<contrast>/<correction>``.

    Lets a collaborator confirm they got the same masks without comparing
    arrays; the hash covers the mask's shape and its boolean values.
    """
    found = {}
    corrections = list(correction_entries(study))
    for contrast in study.get("contrasts", []):
        for correction in corrections:
            path = Path(output_dir) / "contrasts" / contrast["name"] / correction / "result.npz"
            if not path.is_file():
                continue
            with np.load(path) as data:
                mask = np.ascontiguousarray(data["mask"], dtype=bool)
            digest = hashlib.sha256(repr(mask.shape).encode() + mask.tobytes()).hexdigest()
            found[f"{contrast['name']}/{correction}"] = {
                "mask_sha256": digest, "n_significant": int(mask.sum())}
    return found


def write_provenance(path: Path, *, spec_text: str, study: dict, input_files: list[Path],
                     started: str | None, finished: str | None, root: Path | None = None,
                     output_dir: Path | None = None) -> dict:
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
    input_files : list of Path
        Subject input files; each is hashed (SHA-256).
    started, finished : str or None
        Start and end times (ISO 8601, UTC).
    root : Path, optional
        Input paths are recorded relative to this folder (normally the spec's
        folder) so the record does not depend on where the study lives.
    output_dir : Path, optional
        The run's output folder; when given, the hash and count of every
        stored significance mask are recorded too.

    Returns
    -------
    dict
        What was written.
    """
    for file in input_files:
        if not Path(file).is_file():
            raise UserError(f"provenance: expected the input file {file} of this run, "
                            "found no such file")
    inference = study.get("inference", {}) or {}
    record = {
        "spec_fingerprint": spec_fingerprint(study),
        "spec_text": spec_text,
        "seed": study.get("seed"),
        "permutations": inference.get("permutations"),
        "packages": package_versions(),
        "input_files": {_label(p, root): {"sha256": file_sha256(p), "bytes": Path(p).stat().st_size}
                        for p in sorted(input_files, key=lambda p: _label(p, root))},
        "started": started,
        "finished": finished,
    }
    if output_dir is not None:
        record["masks"] = mask_hashes(output_dir, study)
    text = json.dumps(record, indent=2, sort_keys=False, ensure_ascii=False) + "\n"
    write_atomic(Path(path), text.encode("utf-8"))
    return record
