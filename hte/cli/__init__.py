"""The ``hte`` command: one module per subcommand, thin over the library.

Each subcommand module has a docstring whose first line is its short help, ``add_arguments(parser)`` and
``run(args) -> int``; heavy imports happen inside ``run``.  ``main(argv)`` returns the exit code: 0 on
success, 2 on bad input (one clear message, no traceback), 1 on internal errors.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import traceback

SUBCOMMANDS = ("lattice", "clusters", "series", "curves", "fit", "demo")


def _available_subcommands():
    modules = {}
    for name in SUBCOMMANDS:
        try:
            modules[name] = importlib.import_module(f"hte.cli.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"hte.cli.{name}":
                raise
    return modules


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="hte",
        description="High-temperature series for quantum lattice spin models: lattices, clusters, series, "
        "low-temperature curves and fits to measured data.",
    )
    parser.add_argument("--traceback", action="store_true", help="show the full traceback on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, module in _available_subcommands().items():
        doc = (module.__doc__ or name).strip()
        short = doc.splitlines()[0]
        p = sub.add_parser(name, help=short, description=doc)
        p.add_argument("--traceback", action="store_true", help="show the full traceback on errors")
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


def main(argv=None) -> int:
    """Run the command line; return the exit code."""
    from hte.errors import InputError

    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse already printed its message
        return 0 if exc.code in (0, None) else 2
    if not getattr(args, "_run", None):
        parser.print_help()
        return 2
    try:
        return int(args._run(args) or 0)
    except InputError as exc:
        if args.traceback:
            traceback.print_exc()
        print(f"hte {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into e.g. `head`, which closed early: not an error
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except KeyboardInterrupt as exc:
        detail = str(exc) or "finished work is kept; rerun the same command to resume"
        print(f"hte {args.command}: interrupted: {detail}", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - the contract is exit code 1 with a one-line message
        if args.traceback:
            traceback.print_exc()
        print(f"hte {args.command}: internal error: {type(exc).__name__}: {exc}\n"
              "rerun with --traceback for details", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
