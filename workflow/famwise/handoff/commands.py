"""The hand-off subcommands: ``famwise compare`` and ``famwise pack``, and the manifest check of check/run."""

import sys
from pathlib import Path


def add_parsers(commands) -> None:
    """Add ``compare`` and ``pack`` to the CLI's subcommands (the ``add_subparsers`` object)."""
    compare = commands.add_parser(
        "compare",
        help="compare two runs' results (a provenance record received from elsewhere, and this study's); "
        "exit 0 when all are identical, 1 when any differ",
    )
    compare.add_argument("record", type=Path, help="a provenance.json, e.g. a collaborator's")
    compare.add_argument(
        "study", type=Path, help="a spec (its run's report/provenance.json) or another provenance.json"
    )
    compare.set_defaults(handler=command_compare)

    pack = commands.add_parser(
        "pack",
        help="pack a spec, its channel files and a manifest of its data files (sizes, SHA-256) into a ZIP for a collaborator",
    )
    pack.add_argument("spec", type=Path)
    pack.add_argument("archive", type=Path, help="the .zip file to write")
    pack.add_argument("--with-data", action="store_true", help="put the data files in the archive too")
    pack.set_defaults(handler=command_pack)


def command_compare(args) -> int:
    """Handler of ``famwise compare RECORD STUDY``: 0 identical, 1 different (2 for unusable records)."""
    from famwise.handoff.compare import compare_records, comparison_text
    from famwise.handoff.records import read_record, record_path

    first, second = read_record(args.record), read_record(args.study)
    outcomes, found = compare_records(first, second)
    print(
        comparison_text(outcomes, found, first=(str(args.record), first), second=(str(record_path(args.study)), second))
    )
    return 0 if all(o.status == "identical" for o in outcomes) else 1


def command_pack(args) -> int:
    """Handler of ``famwise pack SPEC ARCHIVE [--with-data]``."""
    from famwise.handoff.pack import pack_study

    packed = pack_study(args.spec, args.archive, with_data=args.with_data)
    data = f"{packed.data_files} data files ({packed.data_bytes / 1e6:.1f} MB)"
    print(
        f"famwise: packed {args.spec.name}, {packed.channel_files} channel file(s) and a manifest of {data} "
        + ("with the data" if packed.data_included else "without the data (add --with-data to include them)")
        + f" into {packed.archive}"
    )
    return 0


def verify_handoff(spec: Path) -> None:
    """Before check/run: verify the manifest beside the spec, when there is one (UserError names bad files)."""
    from famwise.handoff.manifest import verify_manifest

    checked = verify_manifest(spec)
    if checked is None:
        return
    confirmation, warnings = checked
    print(f"famwise: {confirmation}", file=sys.stderr)
    for warning in warnings:
        print(f"famwise: warning: {warning}", file=sys.stderr)
