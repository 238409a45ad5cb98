"""The ``tfhrv`` command line.  No science here: parse options, call the library, print.

Every error a user can cause is printed as one line ``tfhrv: error: <file>, line <n>:
<problem>`` with exit status 2 and no traceback (``--debug`` shows the traceback).
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from collections.abc import Sequence

from tfhrv._caution import CAUTION
from tfhrv.errors import InsufficientDataError, RecordFormatError, TfhrvWarning

__all__ = ["main"]



def _add_reader_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the recording")
    g.add_argument("--format", dest="fmt", choices=("auto", "values", "table", "edf"),
                   default="auto", help="force the input format (default: sniffed)")
    g.add_argument("--units", choices=("ms", "s"), help="unit of the intervals when the file "
                   "does not say and the values are ambiguous")
    g.add_argument("--delimiter", help="table delimiter (default: sniffed among , ; tab)")
    g.add_argument("--decimal", choices=(".", ","), help="decimal mark (default: sniffed)")
    g.add_argument("--time-column", help="name of the beat-time column (s from start)")
    g.add_argument("--clock-column", help="name of the clock-timestamp column")
    g.add_argument("--interval-column", help="name of the interval column")
    g.add_argument("--label-column", help="name of the beat-label column")
    g.add_argument("--start", help="wall-clock start: ISO 8601 timestamp or time of day HH:MM[:SS]"
                   " (overrides the file)")
    g.add_argument("--record-id", help="record identifier (default: from the file)")


def _read(args: argparse.Namespace):
    from tfhrv.io.readers import read_recording

    delimiter = "\t" if args.delimiter in ("\\t", "tab") else args.delimiter
    return read_recording(
        args.recording, fmt=args.fmt, units=args.units, delimiter=delimiter,
        decimal=args.decimal, time_column=args.time_column, clock_column=args.clock_column,
        interval_column=args.interval_column, label_column=args.label_column,
        start=args.start, record_id=args.record_id,
    )


def _cmd_inspect(args: argparse.Namespace) -> int:
    from tfhrv.clean import clean
    from tfhrv.inspection import format_inspection, inspection_dict

    rec = _read(args)
    cleaned = clean(rec)
    if args.json:
        print(json.dumps(inspection_dict(cleaned), indent=2))
    else:
        print(format_inspection(cleaned))
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every verb."""
    from tfhrv import __version__

    parser = argparse.ArgumentParser(
        prog="tfhrv",
        description="Time-resolved scaling analysis of long heart inter-beat (NN) interval "
        "recordings. " + CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"tfhrv {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = parser.add_subparsers(dest="verb", metavar="VERB", required=True)

    p = sub.add_parser("inspect", help="quality summary of a recording",
                       description="Read a recording, clean it and print how much is usable: "
                       "recorded and analysable time, removed intervals by reason, ectopic "
                       "share, gaps and hourly coverage. " + CAUTION)
    p.add_argument("recording", help="beat-interval file (text, CSV, EDF+, optionally .gz)")
    p.add_argument("--json", action="store_true", help="print the same as JSON")
    _add_reader_options(p)
    p.set_defaults(func=_cmd_inspect)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tfhrv`` command."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default", TfhrvWarning)
            warnings.showwarning = _show_warning
            return int(args.func(args) or 0)
    except (RecordFormatError, InsufficientDataError, ValueError, TypeError, OSError) as exc:
        if args.debug:
            raise
        print(f"tfhrv: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:  # pragma: no cover - interactive
        print("tfhrv: interrupted", file=sys.stderr)
        return 130


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    print(f"tfhrv: warning: {message}", file=sys.stderr)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
