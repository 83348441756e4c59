"""Warnings the decomposition jobs raised, gathered once per message across subjects.

Each decomposition job records its warnings in ``tf/sub-<id>.json``
(``"warnings"``: a list of messages starting ``subject <id>:``). The command
line prints them after a run and the report shows them; a message raised for
many subjects appears once, naming them.
"""

import json
from pathlib import Path


def _without_subject(message: str, subject: str) -> str:
    return message.removeprefix(f"subject {subject}:").strip()


def gather(output_dir: Path, subjects: list[str]) -> list[str]:
    """One line per distinct warning, e.g. ``baseline window ... (subjects 01, 02)``.

    Parameters
    ----------
    output_dir : Path
        The run's output folder.
    subjects : list of str
        Subject ids whose sidecars are read (missing sidecars are skipped).
    """
    by_message: dict[str, list[str]] = {}
    for subject in subjects:
        path = Path(output_dir) / "tf" / f"sub-{subject}.json"
        if not path.is_file():
            continue
        for message in json.loads(path.read_text(encoding="utf-8")).get("warnings", []):
            by_message.setdefault(_without_subject(message, subject), []).append(subject)
    lines = []
    for message, who in by_message.items():
        noun = "subject" if len(who) == 1 else "subjects"
        lines.append(f"{message} ({noun} {', '.join(who)})")
    return lines


def message_of(line: str) -> str:
    """A gathered line without its trailing ``(subjects ...)``, to compare with an up-front warning."""
    return line.rsplit(" (subject", 1)[0]
