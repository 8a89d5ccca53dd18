"""The ``cracktip`` command.

Exit status: 0 when every row reduced, 2 when any row or the input as a
whole could not be used (the message says which), 1 never on purpose.
"""

from __future__ import annotations

import argparse
import json
import sys

from reduce.errors import CracktipError

EXIT_OK, EXIT_BAD_INPUT = 0, 2


def _json_default(x):
    if hasattr(x, "item"):
        return x.item()
    raise TypeError(f"not JSON-serialisable: {type(x).__name__}")


def results_json(results, sheets=None) -> str:
    """The results as the documented JSON list.

    ``sheets``, when given, is the sheet path of each result; it is added to
    each object under the key ``sheet``.
    """
    dicts = [r.to_dict() for r in results]
    if sheets is not None:
        for d, sheet in zip(dicts, sheets, strict=True):
            d["sheet"] = str(sheet)
    return json.dumps(dicts, indent=2, default=_json_default, allow_nan=False)


def cmd_reduce(args) -> int:
    from reduce.atomic import write_text_atomic
    from reduce.batch import progress_wanted, reduce_sheets
    from reduce.rules import rule_set
    from reports.table import summary_table

    # rows of every sheet in parallel (reduce/batch.py); records kept only for the workbook
    batch = reduce_sheets(args.sheets, args.rules, jobs=args.jobs,
                          progress=progress_wanted(args.quiet), keep_records=bool(args.xlsx))
    for message in batch.errors:
        print(f"cracktip: {message}", file=sys.stderr)
    results = [r.result for r in batch.rows]
    title = rule_set(args.rules)["title"]
    for sheet in batch.sheets:
        if len(batch.sheets) > 1:
            print(f"Sheet: {sheet}")
        print(summary_table([r.result for r in batch.rows if r.sheet == sheet], title))
    if args.json:
        write_text_atomic(args.json, results_json(results, [r.sheet for r in batch.rows]) + "\n")
        print(f"results written to {args.json}")
    if args.xlsx:
        from reports.workbook import write_workbook

        write_workbook(args.xlsx, batch.triples())
        print(f"workbook written to {args.xlsx}")
    ok = not batch.errors and all(r.error is None for r in results)
    return EXIT_OK if ok else EXIT_BAD_INPUT


def _jobs(text: str) -> int:
    try:
        n = int(text)
    except ValueError:
        n = 0
    if n < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number of at least 1, got {text!r}")
    return n


def add_reduce_command(sub) -> None:
    r = sub.add_parser("reduce", help="reduce every row of one or more test sheets")
    r.add_argument("sheets", nargs="+", metavar="SHEET",
                   help="test sheet (.csv or .xlsx), one row per specimen, or a folder of sheets")
    add_rules_option(r)
    r.add_argument("--json", metavar="OUT", help="write the results as JSON")
    r.add_argument("--xlsx", metavar="OUT", help="write the results as an Excel workbook")
    r.add_argument("--jobs", type=_jobs, metavar="N",
                   help="reduce N rows at a time in parallel (default: every available core)")
    r.add_argument("--quiet", action="store_true",
                   help="no progress bar (there is none either when standard error is not a terminal)")
    r.set_defaults(func=cmd_reduce)


def add_rules_option(parser) -> None:
    parser.add_argument("--rules", default="e399", choices=("e399", "iso12737"),
                        help="rule set (default e399)")


#: each command lives in its own module and registers itself with one function;
#: only the module of the command asked for is imported (all of them for help
#: or an unknown command), the heavy libraries only when a command runs.
COMMANDS = [
    ("reduce", "reduce.cli", "add_reduce_command"),
    ("certify", "reduce.certify", "add_certify_command"),
    ("verify", "reduce.certify", "add_verify_command"),
    ("plot", "reduce.certify", "add_plot_command"),
    ("accept", "reduce.qa", "add_accept_command"),
    ("approve", "reduce.qa", "add_approve_command"),
    ("history", "reduce.qa", "add_history_command"),
    ("trend", "reduce.qa", "add_trend_command"),
]


class _ShowVersion(argparse.Action):
    """``--version``: the version with its source digest, worked out only when asked for."""

    def __init__(self, option_strings, dest, **kwargs):
        super().__init__(option_strings, dest, nargs=0, default=argparse.SUPPRESS,
                         help="show the program's version and exit")

    def __call__(self, parser, namespace, values, option_string=None):
        from reduce._version import PROGRAM_VERSION

        print(f"cracktip {PROGRAM_VERSION}")
        parser.exit()


def build_parser(argv=None) -> argparse.ArgumentParser:
    """The command-line parser; given the arguments, only the command they name."""
    import importlib

    p = argparse.ArgumentParser(
        prog="cracktip",
        description="Reduce fracture-toughness test records (ASTM E399 / ISO 12737) to K_Q, "
                    "validity and K_Ic, and issue certificates.")
    p.add_argument("--version", action=_ShowVersion)
    sub = p.add_subparsers(dest="command", required=True)
    first = next((a for a in (argv or []) if not a.startswith("-")), None)
    wanted = [c for c in COMMANDS if c[0] == first] or COMMANDS
    for _, module, func in wanted:
        getattr(importlib.import_module(module), func)(sub)
    return p


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    args = build_parser(argv).parse_args(argv)
    try:
        return args.func(args)
    except CracktipError as exc:
        print(f"cracktip: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        # the reader of our output went away (e.g. `| head`): stop quietly
        sys.stderr.close()
        return EXIT_OK
    except OSError as exc:
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"cracktip: {where}{exc.strerror or exc}", file=sys.stderr)
        return EXIT_BAD_INPUT


def console() -> None:
    """The ``cracktip`` command (the console entry point): :func:`main`, then exit with its status."""
    import gc

    # The modules imported by now live as long as the process: the collector
    # need not look at them again during the run, nor (in forked workers) touch
    # their memory; and at the end it is spared a last pass over every object.
    gc.freeze()
    status = main()
    gc.freeze()
    sys.exit(status)


if __name__ == "__main__":
    console()
