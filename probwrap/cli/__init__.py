"""The ``probwrap`` command line.

Verbs are registered by the modules of this package; each adds a sub-parser and sets
``func(args) -> int``. Exit codes: 0 success, 2 usage error (argparse), 1 data error with a
one-line message naming the file, column or row and the problem.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from ._common import DataError

__all__ = ["main", "DataError"]

#: modules that register verbs, in the order they appear in ``--help``
_VERB_MODULES = ("_demo", "_calibrate", "_cutoff", "_prevalence", "_report_verb")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every available verb."""
    parser = argparse.ArgumentParser(
        prog="probwrap",
        description="Calibrated probabilities, least-expected-cost decisions and base-rate "
        "shift, from the command line.",
    )
    from probwrap import __version__

    parser.add_argument("--version", action="version", version=f"probwrap {__version__}")
    sub = parser.add_subparsers(dest="verb", metavar="VERB")
    sub.required = True
    for name in _VERB_MODULES:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue  # verb not available in this version
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except DataError as exc:
        print(f"probwrap {args.verb}: error: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:  # pragma: no cover
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
