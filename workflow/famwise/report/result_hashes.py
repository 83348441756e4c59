"""Hashes of a run's results, for the provenance record and ``famwise compare``.

Each array is hashed from its dtype, shape and C-order bytes, so equal arrays
hash equal whatever the NPZ file's zip metadata (timestamps, compression).
Cluster tables are hashed as the text famwise wrote.
"""

import hashlib
import json
from pathlib import Path

import numpy as np

from famwise.errors import UserError
from famwise.report.results import correction_entries

METADATA_KEYS = frozenset({"settings"})
"""NPZ entries that record parameters rather than results (the spec settings cover them)."""

TABLE_FILES = ("clusters.tsv",)
"""Tables a correction may write beside its ``result.npz``."""


def array_sha256(array: np.ndarray) -> str:
    """SHA-256 (hex) of an array's dtype, shape and C-order bytes."""
    array = np.asarray(array)
    digest = hashlib.sha256(f"{array.dtype.str}|{array.shape}|".encode("ascii"))
    digest.update(array.tobytes(order="C"))
    return digest.hexdigest()


def npz_hashes(path: Path) -> dict[str, str]:
    """:func:`array_sha256` of every result array in an NPZ file, by name (sorted)."""
    with np.load(path, allow_pickle=False) as data:
        return {name: array_sha256(data[name]) for name in sorted(data.files) if name not in METADATA_KEYS}


def _need(path: Path, what: str) -> Path:
    if not path.is_file():
        raise UserError(
            f"provenance: expected {what} at {path}, found no such file; run the earlier stages before the report"
        )
    return path


def _correction_hashes(folder: Path, contrast: str, name: str) -> dict:
    result = _need(folder / "result.npz", f"the result of correction '{name}' of contrast '{contrast}'")
    with np.load(result, allow_pickle=False) as data:
        significant = int(np.count_nonzero(data["mask"]))
    tables = {
        table: hashlib.sha256((folder / table).read_bytes()).hexdigest()
        for table in TABLE_FILES
        if (folder / table).is_file()
    }
    return {"n_significant": significant, "arrays": npz_hashes(result), "tables": tables}


def result_hashes(output_dir: Path, study: dict) -> dict[str, dict]:
    """Hashes of every contrast's statistics and every correction's results.

    Parameters
    ----------
    output_dir : Path
        The run's output folder.
    study : dict
        The validated spec as JSON.

    Returns
    -------
    dict
        ``{contrast: {"statistics": {array: sha256}, "corrections": {correction:
        {"n_significant": int, "arrays": {array: sha256}, "tables": {file: sha256}}}}}``
        with the arrays of ``observed.npz`` and ``result.npz`` and the text of
        ``clusters.tsv``.
    """
    found = {}
    names = list(correction_entries(study))
    for contrast in study.get("contrasts", []):
        folder = Path(output_dir) / "contrasts" / contrast["name"]
        observed = _need(folder / "observed.npz", f"the observed statistics of contrast '{contrast['name']}'")
        found[contrast["name"]] = {
            "statistics": npz_hashes(observed),
            "corrections": {name: _correction_hashes(folder / name, contrast["name"], name) for name in names},
        }
    return found


def results_fingerprint(results: dict) -> str:
    """SHA-256 (hex) over every result hash: equal for two runs exactly when all their results are."""
    text = json.dumps(results, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()
