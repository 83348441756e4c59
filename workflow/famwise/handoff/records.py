"""Reading a provenance record (``report/provenance.json``) for a comparison."""

import json
from pathlib import Path

from famwise.errors import UserError
from famwise.report.result_hashes import results_fingerprint

REQUIRED_KEYS = ("spec_settings", "seed", "permutations", "packages", "input_files", "results", "results_fingerprint")
"""Keys a record needs for ``famwise compare``."""


def record_path(path: Path) -> Path:
    """The record of ``path``: the file itself (``.json``), or the record a spec's run wrote.

    Raises
    ------
    UserError
        When the spec's run has no record yet.
    """
    path = Path(path)
    if path.suffix.lower() == ".json":
        return path
    from famwise.spec import load_study

    record = load_study(path).output / "report" / "provenance.json"
    if not record.is_file():
        raise UserError(f"{path}: this study has no provenance record yet ({record}); run it first: famwise run {path}")
    return record


def _check_results(results, path: Path) -> None:
    if not isinstance(results, dict):
        raise UserError(f"{path}: 'results' is not a mapping of contrasts; not a famwise provenance record")
    for contrast, entry in results.items():
        if not (
            isinstance(entry, dict)
            and isinstance(entry.get("statistics"), dict)
            and isinstance(entry.get("corrections"), dict)
            and all(
                isinstance(c, dict) and isinstance(c.get("arrays"), dict) and isinstance(c.get("tables", {}), dict)
                for c in entry["corrections"].values()
            )
        ):
            raise UserError(
                f"{path}: results of contrast '{contrast}' are malformed "
                "(expected 'statistics' and 'corrections' with 'arrays' hashes)"
            )


def read_record(path: Path) -> dict:
    """A provenance record, checked to hold what a comparison needs.

    Parameters
    ----------
    path : Path
        A ``provenance.json`` file, or a spec whose run wrote one.

    Raises
    ------
    UserError
        For a missing file, invalid JSON, a record without the keys of
        :data:`REQUIRED_KEYS` (e.g. one written before famwise hashed
        results), or one whose results fingerprint does not match its hashes.
    """
    path = record_path(path)
    if not path.is_file():
        raise UserError(f"{path}: no such provenance record")
    try:
        record = json.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise UserError(f"{path}: not a provenance record (not UTF-8 text)") from None
    except json.JSONDecodeError as error:
        raise UserError(f"{path}: not a provenance record (invalid JSON at line {error.lineno}: {error.msg})") from None
    if not isinstance(record, dict):
        raise UserError(f"{path}: not a provenance record (expected a JSON object)")
    missing = [key for key in REQUIRED_KEYS if key not in record]
    if "results" in missing and "spec_fingerprint" in record:
        raise UserError(
            f"{path}: this record has no result hashes (written by famwise "
            f"{record.get('packages', {}).get('famwise', '?')}); rerun that study's report with this famwise"
        )
    if missing:
        raise UserError(f"{path}: not a famwise provenance record (missing {', '.join(missing)})")
    for key in ("spec_settings", "packages", "input_files"):
        if not isinstance(record[key], dict):
            raise UserError(f"{path}: '{key}' is not a mapping; not a famwise provenance record")
    _check_results(record["results"], path)
    if record.get("results_fingerprint") != results_fingerprint(record["results"]):
        raise UserError(
            f"{path}: the results fingerprint does not match the record's result hashes; "
            "the record was altered after famwise wrote it"
        )
    return record
