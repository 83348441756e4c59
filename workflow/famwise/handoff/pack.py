"""Pack a study for a collaborator (``famwise pack SPEC ARCHIVE``).

The ZIP archive holds one folder (named after the archive) with the spec,
the channel position and edge files it names, and the manifest
``<spec stem>.manifest.json`` of every file the study reads; the subjects'
data go in only on request (``--with-data``), since they can be large. Files
keep their places relative to the spec, so the unpacked spec runs as it is
once the data sit where the manifest names them (the spec's paths all lie
inside its folder).
"""

import json
import os
import zipfile
from dataclasses import dataclass
from pathlib import Path

from famwise.errors import UserError
from famwise.handoff.inputs import study_files
from famwise.handoff.manifest import build_manifest, manifest_path


@dataclass(frozen=True)
class Packed:
    """What went into an archive.

    Attributes
    ----------
    archive : Path
    channel_files, data_files : int
        Numbers of channel and data files in the manifest.
    data_bytes : int
        Total size of the data files.
    data_included : bool
        Whether the data files are in the archive.
    """

    archive: Path
    channel_files: int
    data_files: int
    data_bytes: int
    data_included: bool


def pack_study(spec: Path, archive: Path, *, with_data: bool = False) -> Packed:
    """Write the hand-off archive of a study.

    Parameters
    ----------
    spec : Path
        The study spec (validated, its inputs checked).
    archive : Path
        The ZIP file to write (replaced atomically if it exists).
    with_data : bool
        Also put the subjects' data files in the archive.

    Returns
    -------
    Packed
    """
    from famwise.plan import Plan

    archive = Path(archive)
    if archive.suffix.lower() != ".zip":
        raise UserError(f"famwise pack: the archive must be a .zip file, got {archive}")
    plan = Plan.from_spec(spec)
    spec = plan.loaded.path
    files = study_files(plan)
    manifest = build_manifest(spec, files, data_included=with_data)
    packed = {spec.name: spec, **files.channel_files, **(files.data_files if with_data else {})}
    top = archive.name[: -len(archive.suffix)]
    archive.parent.mkdir(parents=True, exist_ok=True)
    partial = archive.with_name(archive.name + ".partial")
    with zipfile.ZipFile(partial, "w", compression=zipfile.ZIP_DEFLATED) as handle:
        for name, path in packed.items():
            handle.write(path, f"{top}/{name}")
        handle.writestr(f"{top}/{manifest_path(spec).name}", json.dumps(manifest, indent=2) + "\n")
    os.replace(partial, archive)
    return Packed(
        archive=archive,
        channel_files=len(files.channel_files),
        data_files=len(files.data_files),
        data_bytes=sum(p.stat().st_size for p in files.data_files.values()),
        data_included=with_data,
    )
