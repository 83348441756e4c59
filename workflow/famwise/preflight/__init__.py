"""Everything that can be known before the first job, checked up front.

`preflight` is called by ``famwise check`` and ``famwise run`` (before
Snakemake starts). It reads the spec, the subjects' file headers, events and
channel lists (never the samples), and raises `famwise.errors.UserError`
naming the spec key and its line for the first problem found. Per-sample
checks (NaN) stay in the decomposition job.
"""

from famwise.errors import UserError
from famwise.preflight.data_checks import check_consistent, check_epoch_counts, check_labels, check_windows_fit
from famwise.preflight.graph_check import check_channels
from famwise.preflight.headers import SubjectHeader, bids_header, npz_epochs_header
from famwise.preflight.report_check import check_report_channels
from famwise.preflight.spec_checks import check_exclusions, check_group_sizes, check_shards, check_statistic
from famwise.preflight.timing import check_timing
from famwise.preflight.where import Where

__all__ = ["Where", "preflight", "read_headers"]


def preflight(plan) -> list[str]:
    """Check a plan against its inputs; return warnings (one line each, deduplicated).

    Raises
    ------
    UserError
        ``file:line key: message`` (or the subject and file) for the first problem.
    """
    where = Where(plan.loaded)
    check_exclusions(plan, where)
    check_group_sizes(plan, where)
    check_statistic(plan, where)
    check_shards(plan, where)
    headers = read_headers(plan)
    found = []
    if headers:
        check_consistent(headers)
        check_labels(plan, headers, where)
        check_epoch_counts(plan, headers, where)
        check_windows_fit(headers, where)
        found += check_timing(plan, headers, where)
    first = next(iter(headers.values())).channels if headers else None
    first = first if first is not None else plan.first_subject_channels()
    check_report_channels(plan, first, where)
    found += check_channels(plan, first, where)
    return found


def read_headers(plan) -> dict[str, SubjectHeader]:
    """Each analysed subject's header, in order (empty for time-frequency input)."""
    spec = plan.study.subjects
    if spec.source == "maps":
        return {}
    if spec.source == "epochs":
        return {s: npz_epochs_header(plan.input_files(s)[0], s) for s in plan.subjects}
    root = plan.loaded.resolve(spec.path)
    wanted = {label for labels in plan.study.conditions.values() for label in labels}
    window = tuple(plan.study.epochs.window_ms)
    headers = {}
    for subject in plan.subjects:
        try:
            headers[subject] = bids_header(root, subject, task=spec.task, window_ms=window, wanted=wanted)
        except UnicodeDecodeError as error:
            raise UserError(f"subject {subject}: a text file of the recording is not UTF-8 ({error})") from None
    return headers
