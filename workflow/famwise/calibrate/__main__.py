"""Job entry of the calibration rules: ``python -m famwise.calibrate chunk|table ...``.

``chunk`` writes ``calibration/<contrast>/chunk-<k>.npz``; ``table`` merges
the chunks into ``calibration/<contrast>.tsv`` (+ .json, .png, .svg) and
prints the table. A user error ends the job with one line
``famwise: error: ...`` on stderr and exit status 2.
"""

import argparse
import json
import sys
import time
from pathlib import Path

from famwise.errors import UserError
from famwise.atomic import save_npz


def _say(message: str) -> None:
    print(f"[{time.strftime('%H:%M:%S')}] {message}", file=sys.stderr, flush=True)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="python -m famwise.calibrate", description=__doc__)
    parser.add_argument("step", choices=("chunk", "table"))
    parser.add_argument("--settings", required=True, help="the calibration settings as JSON")
    parser.add_argument("--subjects", help="contrasts/<c>/subjects.npz (chunk, table)")
    parser.add_argument("--observed", help="contrasts/<c>/observed.npz (table)")
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
            from famwise.calibrate.datasets import calibration_chunk  # numba and scipy: only where needed

            graph = Path(args.graph) if args.graph.strip() else None
            arrays = calibration_chunk(Path(args.subjects), graph, chunk=args.chunk, settings=settings, progress=_say)
            save_npz(Path(args.out), **arrays)
        else:
            from famwise.calibrate.table import summarize

            rows = summarize([Path(p) for p in args.inputs], Path(args.out), settings=settings,
                             subjects=Path(args.subjects), observed=Path(args.observed))
            for row in rows:
                _say(f"{settings['contrast']}: {row.correction}: FWER {row.fwer:.3f} "
                     f"[{row.fwer_ci_low:.3f}, {row.fwer_ci_high:.3f}] (nominal {row.nominal:g})")
    except UserError as error:
        print(f"famwise: error: {error}", file=sys.stderr, flush=True)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
