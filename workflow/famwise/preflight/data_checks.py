"""Checks of the spec against the subjects' headers and events: labels, epoch counts, consistency."""

from collections import Counter

from famwise.errors import UserError
from famwise.preflight.headers import SubjectHeader
from famwise.preflight.where import Where
from famwise.spec.models import did_you_mean


def check_labels(plan, headers: dict[str, SubjectHeader], where: Where) -> None:
    """Each condition's event labels occur in some subject's data."""
    found = Counter()
    for header in headers.values():
        found.update(header.labels)
    for name, labels in plan.study.conditions.items():
        for label in labels:
            if not found[label]:
                known = sorted(found)
                raise UserError(
                    f"{where('conditions', name)}: no analysed subject's data has an event labelled '{label}' "
                    f"(labels found: {', '.join(known) or 'none'}){did_you_mean(label, known)}"
                )


def check_epoch_counts(plan, headers: dict[str, SubjectHeader], where: Where) -> None:
    """Every subject has at least ``subjects.min_epochs`` epochs of each condition (before rejection)."""
    minimum = plan.study.subjects.min_epochs
    key = where("subjects", "min_epochs")
    for name, labels in plan.study.conditions.items():
        counts = {s: sum(h.labels[label] for label in labels) for s, h in headers.items()}
        most = max(counts.values())
        if most < minimum:
            raise UserError(
                f"{key}: {minimum} is more than condition '{name}' has in any subject (at most {most} epochs); lower min_epochs"
            )
        for subject, count in counts.items():
            if count < minimum:
                raise UserError(
                    f"{key}: subject {subject} has {count} epoch{'' if count == 1 else 's'} of condition '{name}', "
                    f"fewer than {minimum}; exclude the subject (subjects.exclude) or lower min_epochs"
                )


def check_windows_fit(headers: dict[str, SubjectHeader], where: Where) -> None:
    """Every wanted event's epoch window lies inside its recording (BIDS)."""
    for subject, header in headers.items():
        if header.beyond:
            raise UserError(
                f"{where('epochs', 'window_ms')}: subject {subject}: the epoch window around {header.beyond} runs beyond the recording"
            )


def check_consistent(headers: dict[str, SubjectHeader]) -> None:
    """Every subject has the first one's channels and sampling rate."""
    (reference, first), *others = headers.items()
    for subject, header in others:
        if header.channels is not None and first.channels is not None and header.channels != first.channels:
            extra = sorted(set(header.channels) - set(first.channels))
            missing = sorted(set(first.channels) - set(header.channels))
            detail = (
                f"extra: {', '.join(extra) or 'none'}; missing: {', '.join(missing) or 'none'}"
                if extra or missing
                else "same names in a different order"
            )
            raise UserError(
                f"subject {subject}: channels differ from subject {reference} ({detail}) in {header.source}"
            )
        if first.sample_rate_hz and header.sample_rate_hz and abs(header.sample_rate_hz - first.sample_rate_hz) > 1e-9:
            raise UserError(
                f"subject {subject}: sampling rate {header.sample_rate_hz:g} Hz differs from subject {reference} "
                f"({first.sample_rate_hz:g} Hz) in {header.source}; resample the recordings to one rate"
            )
