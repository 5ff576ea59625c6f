"""`tcgauge calibrate`: guided calibration of one channel against a reference gauge.

    tcgauge calibrate --port PORT --gas N2 --points 1e-3:1:4 --unit TORR \\
        --reference typed|serial:URL|sim --traceability TEXT -o FOLDER [--push]

A thin shell over tcgauge.calrun.run: vacuum zero at base pressure, then per
pressure "set the chamber to about X, press Enter" and readings until the
device and the reference are both stable, the fit, the uncertainty budget,
the table file and report in FOLDER, and with --push the table onto the
channel. On a sim:// port (an in-process virtual device opened with
scenario=calibration) the simulator's chamber is stepped instead of asking,
and `--reference sim` reads its true pressure through a simulated reference
gauge with the stated uncertainty. `--script FILE` answers the prompts (and
typed reference readings) from a file, one line each.

Calibration work near vacuum systems: see the cautions in the report and
docs; the controller is never a safety interlock.
"""

import math
import sys

from tcgauge.errors import TcgaugeError


def parse_points(text, unit):
    """'1e-3,1e-2,0.1' or 'LO:HI:N' (N per decade, log-spaced, both ends) -> pressures in Pa."""
    from gaugecore import units

    try:
        if ":" in text:
            lo, hi, n = text.split(":")
            lo, hi, n = float(lo), float(hi), float(n)
            if not (0 < lo < hi and n > 0):
                raise ValueError
            k = int(round(n * math.log10(hi / lo))) + 1
            values = [lo * (hi / lo) ** (i / (k - 1)) for i in range(k)]
        else:
            values = [float(x) for x in text.replace(",", " ").split()]
    except ValueError:
        raise TcgaugeError("--points: expected 'P1,P2,...' or 'LO:HI:PER_DECADE', got %r" % text)
    if any(not (v > 0 and math.isfinite(v)) for v in values):
        raise TcgaugeError("--points: pressures must be positive")
    return [units.to_pa(v, unit) for v in values]


class ScriptInput:
    """input(prompt) answered by the lines of a file, echoed to `out`."""

    def __init__(self, path, out=None):
        try:
            with open(path, encoding="utf-8") as f:
                self.lines = [line.rstrip("\n") for line in f]
        except OSError as exc:
            raise TcgaugeError("--script %s: %s" % (path, exc.strerror or exc))
        self.out = out

    def __call__(self, prompt=""):
        out = sys.stdout if self.out is None else self.out
        if not self.lines:
            raise TcgaugeError("--script: no line left for %r" % prompt.strip())
        line = self.lines.pop(0)
        print(prompt + line, file=out)
        return line


def make_reference(args, ask, device):
    """The reference gauge of --reference (tcgauge.refgauge)."""
    from tcgauge.refgauge import SerialReference, SimReference, TypedReference

    kw = {"resolution_pa": args.ref_resolution_pa, "resolution_rel": args.ref_resolution_rel,
          "drift_rel": args.ref_drift, "traceability": args.traceability}
    kind = args.reference
    if kind == "typed":
        return TypedReference(args.ref_name or "reference gauge (typed)", args.ref_u, unit=args.ref_unit,
                              input_fn=ask, **kw)
    if kind.startswith("serial:"):
        return SerialReference(args.ref_name or "reference gauge (serial)", args.ref_u, kind[7:],
                               query=args.ref_query.encode().decode("unicode_escape"),
                               unit=args.ref_unit, **kw)
    if kind == "sim":
        if device is None:
            raise TcgaugeError("--reference sim needs a sim:// port (the simulator's true pressure)")
        ch = args.channel - 1
        return SimReference(lambda: device.bench.true_pressure_pa(ch),
                            name=args.ref_name or "simulated reference gauge", u_rel=args.ref_u,
                            seed=args.ref_seed, noise_rel=args.ref_noise, **kw)
    raise TcgaugeError("--reference: use typed, serial:URL or sim, not %r" % kind)


class Display:
    """Progress of the run: a rich status line on a terminal, plain lines otherwise."""

    def __init__(self, out=None):
        out = sys.stdout if out is None else out
        self.out = out
        self.status = None
        if out.isatty():
            from rich.console import Console

            self.status = Console(file=out).status("starting")
            self.status.start()

    def __call__(self, d):
        step = d.get("step")
        if step == "point" and self.status is not None:
            self.status.update("point %d/%d at %.3g Pa: EMF %.5f mV %s, reference %.4g Pa %s"
                               % (d["point"] + 1, d["of"], d["p_set_pa"], d["emf_mv"],
                                  "stable" if d["emf_stable"] else "settling", d["p_ref_pa"],
                                  "stable" if d["ref_stable"] else "settling"))
            return
        if step == "zero" and "state" in d:
            if self.status is not None:
                self.status.update("vacuum zero: %.0f s" % d["t_s"])
            return
        text = None
        if step in ("base", "zero"):
            text = d["text"]
        elif step == "set":
            text = "point %d/%d: about %.3g Pa" % (d["point"] + 1, d["of"], d["p_set_pa"])
        elif step == "taken":
            text = ("point %d/%d taken: reference %.5g Pa, EMF %.6f mV (%d readings)"
                    % (d["point"] + 1, d["of"], d["p_ref_pa"], d["emf_mv"], d["n"]))
        if text:
            if self.status is not None:
                self.status.console.print(text)
            else:
                print(text, file=self.out)

    def stop(self):
        if self.status is not None:
            self.status.stop()


def _load_table(path):
    from gaugecore import tablefile

    try:
        with open(path, "rb") as f:
            return tablefile.loads(f.read())
    except (OSError, ValueError) as exc:
        raise TcgaugeError("--earlier %s: %s" % (path, exc))


def _cmd(args):
    from gaugecore import units
    from tcgauge import calrun
    from tcgauge.calibrate import CalibrationError
    from tcgauge.client import Client
    from tcgauge.cmd_info import open_port
    from tcgauge.link import Link

    unit = args.unit.upper()
    if unit not in units.PA_PER_UNIT:
        raise TcgaugeError("--unit: use PA, TORR, MBAR or MICRON")
    points = parse_points(args.points, unit)
    earlier = [_load_table(path) for path in args.earlier or ()]
    ask = ScriptInput(args.script) if args.script else input
    port = open_port(args.port)
    display = None
    try:
        client = Client(Link(port, timeout_s=args.timeout)).open()
        device = calrun.sim_device(port)
        reference = make_reference(args, ask, device)
        if device is not None and args.reference == "sim":
            chamber = calrun.SimChamber(device, args.channel)
        else:
            chamber = calrun.Chamber(ask, unit)
        clock = calrun.sim_clock(device, client.link) if device is not None else calrun.Clock()
        collect = {"interval_s": args.interval, "window_s": args.window, "timeout_s": args.point_timeout}
        display = Display()
        res = calrun.run(client, args.channel, args.gas, points, reference, chamber, clock, args.output,
                         args.traceability, settle_s=args.settle, progress=display, push=args.push,
                         name=args.name, zero=not args.no_zero, collect_kw=collect,
                         info={"operator": args.operator} if args.operator else None,
                         reproducibility_rel=args.reproducibility, earlier=earlier)
    except CalibrationError as exc:
        raise TcgaugeError("calibration stopped: %s" % exc)
    finally:
        if display is not None:
            display.stop()
        port.close()
    c = res.cal
    print("zero offset %s mV, heater %.6g mA" % ("-" if res.zero_mv is None else "%.4g" % res.zero_mv,
                                                 res.heater_ma))
    for lo, u, n in c.per_decade():
        print("  %.3g..%.3g Pa: %d points, U up to %.3g %% (k=2)" % (lo, lo * 10, n, u * 100))
    for pt, why in c.fit.rejected:
        print("  rejected %.4g Pa: %s" % (pt.p_ref_pa, why))
    print("wrote %s, %s, %s" % (res.paths["table"], res.paths["markdown"], res.paths["png"]))
    if res.push is not None:
        print("pushed as %s to channel %d, crc32 0x%08x verified" % (res.push.name, res.push.channel,
                                                                     res.push.crc32))
    return 0


def register(subparsers):
    """Add the `calibrate` verb."""
    p = subparsers.add_parser("calibrate", help="calibrate a channel against a reference gauge",
                              description=__doc__.split("\n\n")[0])
    p.add_argument("--port", required=True, help="serial port or URL (sim://?scenario=calibration)")
    p.add_argument("--channel", type=int, default=1, help="channel to calibrate (default 1)")
    p.add_argument("--gas", default="N2", help="calibration gas (default N2)")
    p.add_argument("--points", required=True,
                   help="pressures in --unit: 'P1,P2,...' or 'LO:HI:PER_DECADE' (log-spaced)")
    p.add_argument("--unit", default="TORR", help="unit of --points and the prompts (default TORR)")
    p.add_argument("--reference", required=True, help="typed, serial:URL or sim")
    p.add_argument("--traceability", required=True,
                   help="the reference's certificate statement, quoted in the report")
    p.add_argument("-o", "--output", required=True, metavar="FOLDER", help="folder for table and report")
    p.add_argument("--push", action="store_true", help="push the new table onto the channel")
    p.add_argument("--name", default=None, help="device table name for --push (default cal_<gas>)")
    p.add_argument("--script", default=None, metavar="FILE", help="answer the prompts from FILE")
    p.add_argument("--settle", type=float, default=0.0, metavar="S",
                   help="seconds to wait after each pressure change before reading")
    p.add_argument("--interval", type=float, default=1.0, metavar="S", help="seconds between readings")
    p.add_argument("--window", type=float, default=20.0, metavar="S", help="stability window")
    p.add_argument("--point-timeout", type=float, default=900.0, metavar="S",
                   help="give up a point after S seconds without stability")
    p.add_argument("--no-zero", action="store_true", help="skip the vacuum zero (not recommended)")
    p.add_argument("--operator", default=None, help="name for the report")
    rep = p.add_mutually_exclusive_group()
    rep.add_argument("--earlier", nargs="+", metavar="TABLE",
                     help="tables of earlier calibrations of this tube in this gas: the budget's reproducibility "
                     "is their spread with this run (relative standard deviation)")
    rep.add_argument("--reproducibility", type=float, default=None, metavar="REL",
                     help="reproducibility of repeated calibrations, relative standard deviation (e.g. 0.02)")
    p.add_argument("--timeout", type=float, default=2.0, metavar="S", help="reply timeout")
    g = p.add_argument_group("reference gauge")
    g.add_argument("--ref-name", default=None, help="name in the report")
    g.add_argument("--ref-u", type=float, default=0.01,
                   help="relative standard uncertainty (k=1) from its certificate (default 0.01)")
    g.add_argument("--ref-unit", default="TORR", help="unit it reads or is typed in (default TORR)")
    g.add_argument("--ref-resolution-pa", type=float, default=0.0, help="display step, Pa")
    g.add_argument("--ref-resolution-rel", type=float, default=0.0, help="display step, relative")
    g.add_argument("--ref-drift", type=float, default=0.0, help="relative drift since its certificate")
    g.add_argument("--ref-query", default="P?\\r\\n", help="serial query line (default 'P?\\r\\n')")
    g.add_argument("--ref-seed", type=int, default=0, help="sim: seed of its error")
    g.add_argument("--ref-noise", type=float, default=0.001, help="sim: relative reading noise")
    p.set_defaults(func=_cmd)
