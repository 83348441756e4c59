"""Job entry of the power rules: ``python -m famwise.power chunk|table ...``.

``chunk`` writes ``power/<contrast>/<effect>/n<n>/chunk-<k>.npz``; ``table``
merges a contrast's chunks into ``power/<contrast>.tsv`` (+ .json, .png,
.svg, .md). A user error ends the job with one line ``famwise: error: ...``
on stderr and exit status 2.
"""

import argparse
import json
import sys
import time
from pathlib import Path

from famwise.atomic import save_npz, write_text
from famwise.errors import UserError


def _say(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", file=sys.stderr, flush=True)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="python -m famwise.power", description=__doc__)
    parser.add_argument("step", choices=("chunk", "table"))
    parser.add_argument("--settings", required=True, help="the chunk's or the table's settings as JSON")
    parser.add_argument("--subjects", help="the pilot's contrasts/<c>/subjects.npz")
    parser.add_argument("--graph", default="", help="channels/graph.npz (chunk; empty for none)")
    parser.add_argument("--chunk", type=int, help="chunk index (chunk)")
    parser.add_argument("--out", required=True, help="chunk file (chunk) or TSV (table)")
    parser.add_argument("inputs", nargs="*", help="chunk files (table)")
    return parser


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_intermixed_args(argv)
    settings = json.loads(args.settings)
    try:
        if args.step == "chunk":
            from famwise.power.chunk import power_chunk  # numba and scipy: only where needed

            graph = Path(args.graph) if args.graph.strip() else None
            arrays = power_chunk(Path(args.subjects), graph, chunk=args.chunk, settings=settings, progress=_say)
            save_npz(Path(args.out), **arrays)
        else:
            _table(args, settings)
    except UserError as error:
        print(f"famwise: error: {error}", file=sys.stderr, flush=True)
        return 2
    return 0


def _table(args, settings: dict) -> None:
    import numpy as np

    from famwise.power.curves import power_figure
    from famwise.power.table import read_table, summarize
    from famwise.power.text import format_rows, methods_sentences

    out = Path(args.out)
    summarize([Path(p) for p in args.inputs], out, settings=settings)
    rows = read_table(out)
    info = json.loads(out.with_suffix(".json").read_text(encoding="utf-8"))["Power"]
    power_figure(rows, contrast=settings["contrast"], target=settings["target"], folder=out.parent, stem=out.stem)
    with np.load(args.subjects, allow_pickle=False) as archive:
        pilot_n = int(archive["subjects"].size)
    write_text(out.with_suffix(".md"), methods_sentences(rows, info, pilot_n=pilot_n) + "\n")
    _say(f"{settings['contrast']}:\n{format_rows(rows, info)}")


if __name__ == "__main__":
    sys.exit(main())
