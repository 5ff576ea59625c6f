"""`tcgauge info --port PORT`: the board's identity and firmware version (tcgauge.identity).

Prints the *IDN? fields, the SCPI version, the board's free heap and the
host's version. When the firmware's version differs from the host's, a
warning goes to stderr and the firmware line is marked; a board short of heap
gets a warning too; the exit status stays 0 (the board answered).
"""

import sys

from tcgauge.errors import TcgaugeError

READ_TIMEOUT_S = 0.05


def open_port(name):
    """Open `name` (device path or pyserial URL, sim:// included) for the protocol."""
    import serial

    import tcgauge.link  # noqa: F401  (registers sim://)

    try:
        return serial.serial_for_url(name, 115200, timeout=READ_TIMEOUT_S)
    except (serial.SerialException, OSError, ValueError) as exc:
        raise TcgaugeError("cannot open %s: %s" % (name, exc))


def _cmd(args):
    from tcgauge.client import Client
    from tcgauge.identity import describe, heap_warning, identify, version_warning
    from tcgauge.link import Link, LinkTimeout

    port = open_port(args.port)
    try:
        info = identify(Client(Link(port, timeout_s=args.timeout)))
    except LinkTimeout as exc:
        raise TcgaugeError("%s: %s (is the tcgauge firmware running? after `tcgauge deploy`, reset the board)"
                           % (args.port, exc))
    finally:
        port.close()
    sys.stdout.write("port      %s\n" % args.port + describe(info))
    for warning in (version_warning(info), heap_warning(info)):
        if warning:
            print("tcgauge: warning: %s" % warning, file=sys.stderr)
    return 0


def register(subparsers):
    """Add the `info` verb."""
    p = subparsers.add_parser("info", help="show the board's identity, firmware version and free heap",
                              description=__doc__.split("\n\n")[0])
    p.add_argument("--port", required=True, help="serial port or URL (e.g. /dev/ttyACM0, sim://)")
    p.add_argument("--timeout", type=float, default=2.0, metavar="S",
                   help="seconds to wait for each reply (default 2)")
    p.set_defaults(func=_cmd)
