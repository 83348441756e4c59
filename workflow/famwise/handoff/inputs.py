"""The files a study reads, named as its spec names them (relative to the spec's folder)."""

import os
from dataclasses import dataclass
from pathlib import Path

from famwise import bids


@dataclass(frozen=True)
class StudyFiles:
    """Files a study reads besides its spec.

    Attributes
    ----------
    channel_files : list of Path
        Electrode-position and neighbor-edge files named in ``channels``
        (small; always packed with the spec).
    data_files : list of Path
        The analysed subjects' data: their epochs files, or their BIDS
        recordings with sidecars and electrodes, and ``participants.tsv``.
    """

    channel_files: list[Path]
    data_files: list[Path]

    @property
    def all(self) -> list[Path]:
        """Channel files, then data files."""
        return [*self.channel_files, *self.data_files]


def study_files(plan) -> StudyFiles:
    """The files a planned study reads (absolute paths, each listed once, in a stable order).

    Parameters
    ----------
    plan : famwise.plan.Plan
        A resolved study (its inputs already checked).
    """
    data = [Path(f) for subject in plan.subjects for f in plan.input_files(subject)]
    subjects = plan.study.subjects
    if subjects.source == "bids":
        root = plan.loaded.resolve(subjects.path)
        if plan.study.channels.positions == "bids":
            data += [bids.electrodes_file(root, s, task=subjects.task) for s in plan.subjects]
        data.append(root / "participants.tsv")
    data = [p for p in dict.fromkeys(data) if p is not None and p.is_file()]
    return StudyFiles(channel_files=[Path(f) for f in plan.graph_inputs()], data_files=data)


def spec_relative(path: Path, folder: Path) -> str:
    """``path`` as a spec in ``folder`` names it: relative (POSIX), with ``..`` where needed."""
    return Path(os.path.relpath(Path(path).resolve(), Path(folder).resolve())).as_posix()
