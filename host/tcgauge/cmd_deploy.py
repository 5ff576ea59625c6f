"""`tcgauge deploy --port PORT --board pico|pico_w|esp32`: put the firmware on a board (tcgauge.deploy).

Compiles gaugecore and drivers with mpy-cross, generates board.json, copies
everything with mpremote and verifies every file on the board by SHA-256.
`--dry-run` lists the files (size, SHA-256, board path) and copies nothing;
`--verify-only` checks what is on the board against the plan. `--frozen` is for
a board flashed with a frozen build (firmware/manifest.py; the way to fit a
Pico's RAM): only main.py, board.json and the tables are copied, after the
board's frozen firmware is found to be this version.
A failed verification names the file and exits non-zero. A board whose
MicroPython heap is too small for the firmware installed as files gets a
warning (the prepare step reads the heap's size).
"""

import os
import sys

from tcgauge import deploy as dp

FIRMWARE = os.path.join(os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))),
                        "firmware")


def _progress_bar():
    """A rich progress bar and the deploy callback that drives it."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn

    bar = Progress(TextColumn("{task.description:<8}"), BarColumn(), MofNCompleteColumn(),
                   TextColumn("{task.fields[name]}"), transient=False)
    tasks = {}

    def progress(stage, done, total, name):
        if stage not in tasks:
            tasks[stage] = bar.add_task(stage, total=total, name="")
        bar.update(tasks[stage], completed=done, total=total, name=name)

    return bar, progress


def _cmd(args):
    config = {}
    if args.tables:
        config["tables"] = args.tables
    if args.channels is not None:
        config["channels"] = args.channels
    if args.adc is not None:
        config["adc"] = args.adc
    files = dp.plan(args.firmware, args.board, config, frozen=args.frozen)
    if args.verify_only:
        dp.verify(args.port, files)
        print("verified %d files on %s by SHA-256: all match" % (len(files), args.port))
        return 0
    if args.dry_run:
        sys.stdout.write("dry run: would copy to %s (%s), nothing copied\n" % (args.port, args.board))
        sys.stdout.write(dp.describe(files))
        return 0
    bar, progress = _progress_bar()
    with bar:
        result = dp.deploy(args.port, files, progress=progress, frozen=args.frozen)
    for name in result["removed"]:
        print("removed stale %s (it would have shadowed the %s)" % (name, "frozen module" if args.frozen else ".mpy"))
    print("deployed %d files, %d bytes to %s; all verified by SHA-256"
          % (result["files"], result["bytes"], args.port))
    print("reset the board to start the new firmware (its heaters start with it)")
    warning = None if args.frozen else dp.heap_warning(result["heap_bytes"])
    if warning:
        print("tcgauge: warning: %s" % warning, file=sys.stderr)
    return 0


def register(subparsers):
    """Add the `deploy` verb."""
    p = subparsers.add_parser("deploy", help="copy the firmware to a board and verify it",
                              description=__doc__.split("\n\n")[0])
    p.add_argument("--port", required=True, help="the board's serial port (e.g. /dev/ttyACM0)")
    p.add_argument("--board", required=True, choices=dp.BOARDS, help="which board")
    p.add_argument("--dry-run", action="store_true", help="list what would be copied; copy nothing")
    p.add_argument("--frozen", action="store_true",
                   help="the board runs a frozen build of firmware/manifest.py: copy only main.py, board.json "
                   "and the tables, and remove filesystem copies that would shadow the frozen packages")
    p.add_argument("--verify-only", action="store_true",
                   help="copy nothing; check the files on the board against this plan by SHA-256")
    p.add_argument("--tables", nargs="+", metavar="NAME",
                   help="table per channel: a name in firmware/tables or a table file's path "
                   "(its stem is the name on the board); one serves every channel")
    p.add_argument("--channels", type=int, choices=(1, 2), help="number of channels (default from board.json)")
    p.add_argument("--adc", choices=("ads1220", "ads1115"), help="thermocouple ADC (default from board.json)")
    p.add_argument("--firmware", default=FIRMWARE, help="firmware folder (default: the repository's)")
    p.set_defaults(func=_cmd)
