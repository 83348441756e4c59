"""The files a study reads, by the names its spec gives them (relative to the spec's folder)."""

from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from famwise import bids

BUILT_IN_POSITIONS = ("10-10", "10-20", "bids")
"""``channels.positions`` values that name no file of the study."""


@dataclass(frozen=True)
class StudyFiles:
    """Files a study reads besides its spec, by name (POSIX path relative to the spec's folder).

    Names are built from the spec's own paths, so a data folder that is a
    symbolic link keeps the name the spec gives it.

    Attributes
    ----------
    channel_files : dict of str to Path
        Electrode-position and neighbor-edge files named in ``channels``
        (small; always packed with the spec).
    data_files : dict of str to Path
        The analysed subjects' data: their epochs files, or their BIDS
        recordings with sidecars and electrodes, and ``participants.tsv``.
    """

    channel_files: dict[str, Path]
    data_files: dict[str, Path]

    @property
    def all(self) -> dict[str, Path]:
        """Channel files, then data files."""
        return self.channel_files | self.data_files


def _name(*parts: str) -> str:
    return PurePosixPath(*(part.replace("\\", "/") for part in parts)).as_posix()


def _bids_files(plan) -> dict[str, Path]:
    subjects = plan.study.subjects
    root = plan.loaded.resolve(subjects.path)
    files = [Path(f) for s in plan.subjects for f in plan.input_files(s)]
    if plan.study.channels.positions == "bids":
        files += [bids.electrodes_file(root, s, task=subjects.task) for s in plan.subjects]
    files.append(root / "participants.tsv")
    return {_name(subjects.path, p.relative_to(root).as_posix()): p for p in files if p is not None and p.is_file()}


def study_files(plan) -> StudyFiles:
    """The files a planned study reads, each once, in a stable order.

    Parameters
    ----------
    plan : famwise.plan.Plan
        A resolved study (its inputs already checked).
    """
    subjects = plan.study.subjects
    if subjects.source == "bids":
        data = _bids_files(plan)
    else:
        data = {_name(subjects.path.replace("{subject}", s)): Path(plan.input_files(s)[0]) for s in plan.subjects}
    channels = plan.study.channels
    named = [channels.positions] if channels.positions not in BUILT_IN_POSITIONS else []
    if channels.neighbors.method == "edges":
        named.append(channels.neighbors.edges_file)
    channel_files = {_name(value): plan.loaded.resolve(value) for value in named}
    return StudyFiles(channel_files=channel_files, data_files=data)
