"""The `tcgauge` command line: a thin shell over the library.

Each verb lives in a module of its own that exposes `register(subparsers)`;
`register` adds a sub-parser and sets `func(args) -> int` on it. The work
itself lives in library functions that know nothing of argparse. This
module is the one place that turns exceptions into messages and exit codes.
"""

import argparse
import importlib
import logging
import sys

from tcgauge import __version__
from tcgauge.errors import TcgaugeError

# Modules under tcgauge/ that each add one verb (see module docstring).
VERB_MODULES = [
    "tcgauge.cmd_table",
    "tcgauge.cmd_live",
    "tcgauge.cmd_log",
    "tcgauge.cmd_export",
    "tcgauge.cmd_plot",
    "tcgauge.cmd_demo",
    "tcgauge.cmd_sim",
    "tcgauge.cmd_deploy",
    "tcgauge.cmd_info",
    "tcgauge.cmd_calibrate",
]


def main_parser():
    """Build the argument parser with every verb registered."""
    parser = argparse.ArgumentParser(
        prog="tcgauge",
        description="Controller, simulator and tools for thermocouple vacuum gauge tubes. "
        "Readings and setpoints are process aids, never a safety interlock.",
    )
    parser.add_argument("--version", action="version", version="tcgauge " + __version__)
    parser.add_argument("-v", "--verbose", action="count", default=0, help="more log output")
    sub = parser.add_subparsers(dest="verb", metavar="VERB")
    for name in VERB_MODULES:
        importlib.import_module(name).register(sub)
    return parser


def main(argv=None):
    """Run the command line with `argv` (default: sys.argv[1:]); return the exit status."""
    parser = main_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(
        level=logging.WARNING - 10 * min(args.verbose, 2),
        format="%(levelname)s %(name)s: %(message)s",
    )
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except TcgaugeError as exc:
        print("tcgauge: error: %s" % exc, file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("tcgauge: interrupted", file=sys.stderr)
        return 130


def run():
    """Console-script entry point."""
    sys.exit(main())
