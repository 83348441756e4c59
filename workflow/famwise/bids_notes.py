"""What ``famwise check`` tells about a BIDS-EEG folder before any job runs: channels left out, marker counts.

Both read only the small text files (``_channels.tsv``, ``_events.tsv``,
``.vhdr`` headers and ``.vmrk`` markers), never the samples.
"""

from pathlib import Path

from famwise import bids, vhdr
from famwise.errors import UserError


def left_out_lines(root: Path, subjects: list[str], task: str | None) -> list[str]:
    """Lines naming the channels ``_channels.tsv`` leaves out (non-EEG types, status bad) and in how many subjects.

    Returns
    -------
    list of str
        Empty when no channel is left out; else a heading and one line per
        reason, e.g. ``"  - EOG: HEOG, VEOG"``; a channel left out in only
        some subjects says in how many.
    """
    by_reason: dict[str, dict[str, set[str]]] = {}
    for subject in subjects:
        for path in bids.find_recordings(Path(root), subject, task):
            table = bids.read_channels(bids.sidecar(path, "channels.tsv"), subject)
            for name, reason in bids.left_out_channels(table or {}).items():
                by_reason.setdefault(reason, {}).setdefault(name, set()).add(subject)
    if not by_reason:
        return []
    lines = ["Channels left out by _channels.tsv (types other than EEG, and status bad):"]
    for reason in sorted(by_reason, key=lambda r: (r == "bad", r)):
        names = by_reason[reason]
        shown = [
            name if len(names[name]) == len(subjects) else f"{name} ({len(names[name])} of {len(subjects)} subjects)"
            for name in sorted(names)
        ]
        lines.append(f"  - {reason}: {', '.join(shown)}")
    return lines


def marker_warnings(root: Path, subjects: list[str], task: str | None) -> list[str]:
    """One warning per `.vhdr` recording whose stimulus-marker count differs from its ``_events.tsv`` rows.

    Epochs come from ``_events.tsv``; the markers only serve as a cross-check.
    A marker file named by the header but absent is warned about too.
    """
    warnings = []
    for subject in subjects:
        for path in bids.find_recordings(Path(root), subject, task):
            if path.suffix.lower() != ".vhdr":
                continue
            try:
                header = vhdr.read_header(path)
            except UserError as exc:
                raise UserError(f"subject {subject}: {exc}") from None
            events = bids.sidecar(path, "events.tsv")
            if not events.is_file():
                continue  # reading the subject names the missing events file
            if header.marker_file is None or not header.marker_file.is_file():
                warnings.append(
                    f"subject {subject}: the marker file {header.marker_file or '(none)'} named by "
                    f"{path.name} is missing; its stimulus markers are not compared with {events.name}"
                )
                continue
            stimuli = sum(1 for m in vhdr.read_markers(header.marker_file) if m.type.lower() == "stimulus")
            rows = len(bids.read_tsv(events))
            if stimuli != rows:
                warnings.append(
                    f"subject {subject}: {header.marker_file} holds {stimuli} stimulus markers but "
                    f"{events} lists {rows} events; epochs follow {events.name}"
                )
    return warnings
