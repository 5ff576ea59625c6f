"""`tcgauge sim --pty`: run a virtual device on a pseudo-terminal.

The first line of output is the port's path (flushed at once), so a script
can read it and open the port; the device then serves until SIGINT or
SIGTERM, which stop it cleanly (exit status 0). The device is the real
controller on the simulator (tcgauge.sim.device); readings and setpoints
are process aids, never a safety interlock.

    tcgauge sim --pty --scenario pumpdown --speed 10 --fault tc-open@60:2
    tcgauge sim --list-scenarios
"""

import signal
import sys
import threading

from tcgauge.errors import TcgaugeError


def _fault(text):
    from tcgauge.sim.device import parse_fault

    try:
        parse_fault(text)
    except ValueError as exc:
        raise TcgaugeError(str(exc))
    return text


def serve_pty(stop, out=sys.stdout, **options):
    """Serve a VirtualDevice(**options) on a pty until the Event `stop` is set."""
    from tcgauge.sim.device import VirtualDevice

    try:
        dev = VirtualDevice(**options)
    except ValueError as exc:
        raise TcgaugeError(str(exc))
    try:
        path = dev.serve_pty()
        out.write(path + "\n")
        out.flush()
        while not stop.wait(0.2):
            if not dev.running:
                raise TcgaugeError("the virtual device stopped")
    finally:
        dev.close()
    return 0


def _cmd_sim(args):
    from tcgauge.sim.chamber import SCENARIOS

    if args.list_scenarios:
        for name in sorted(SCENARIOS):
            print(name)
        return 0
    if not args.pty:
        raise TcgaugeError("sim: say where to serve: --pty")
    if args.scenario not in SCENARIOS:
        raise TcgaugeError("sim: unknown scenario %r (known: %s)"
                           % (args.scenario, ", ".join(sorted(SCENARIOS))))
    for text in args.fault:
        _fault(text)
    stop = threading.Event()
    old = {}
    for sig in (signal.SIGINT, signal.SIGTERM):
        old[sig] = signal.signal(sig, lambda *_: stop.set())
    try:
        return serve_pty(stop, scenario=args.scenario, gas=args.gas, seed=args.seed,
                         speed=args.speed, faults=tuple(args.fault), channels=args.channels)
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)


def register(sub):
    """Add the `sim` verb."""
    p = sub.add_parser("sim", help="run a virtual device (the controller on the simulator)",
                       description=__doc__.split("\n\n")[0])
    p.add_argument("--pty", action="store_true", help="serve on a new pseudo-terminal; prints its path")
    p.add_argument("--scenario", default="pumpdown", help="chamber scenario (see --list-scenarios)")
    p.add_argument("--gas", default="N2", help="gas in the chamber and of the starting table")
    p.add_argument("--fault", action="append", default=[], metavar="NAME@SECONDS[:CHANNEL]",
                   help="inject a fault at a simulated time on a channel (from 1); repeatable")
    p.add_argument("--speed", type=float, default=1.0, help="simulated seconds per wall second")
    p.add_argument("--seed", type=int, default=0, help="random seed of the simulation")
    p.add_argument("--channels", type=int, default=2, help="number of gauge channels")
    p.add_argument("--list-scenarios", action="store_true", help="print the scenario names and exit")
    p.set_defaults(func=_cmd_sim)
