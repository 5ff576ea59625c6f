"""`tcgauge table ...`: verbs on gas table files.

- `check FILE`: verify the CRC and every table rule, print a short summary.
- `show FILE [--unit U]`: metadata, range, checksum and every point (EMF and
  pressure, plus the band's limits when a sidecar `*.band.json` is beside it).
- `plot FILE... -o out.png [--unit U]`: EMF against pressure, tables overlaid,
  bands shaded (tcgauge.tableplot).
- `derive N2FILE --gas G -o out.json [--profile P]`: a table for another gas
  from an N2 table through the fitted tube model (tcgauge.derive), with its
  band sidecar; refuses to overwrite without --force.

- `push FILE --port PORT [--channel N] [--name NAME]`: send a table to the
  device and install it (tcgauge.transfer), with a progress bar on a
  terminal; success only after the CRC-32 read back matches the file's.
- `pull NAME --port PORT -o FILE`: fetch a catalogue table's exact bytes.
- `list --port PORT`: catalogue tables with their CRC-32, and the table of
  each channel.

A bad file or argument gives one line on stderr and exit status 2 (a
TcgaugeError, turned into that line by tcgauge.cli). Each verb is one
sub-parser in `register`.
"""

import os

from gaugecore import tablefile, units

from tcgauge.errors import TcgaugeError


def check_file(path):
    """Read and verify the table file at `path` -> (Table, crc32). Raises TcgaugeError."""
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError as exc:
        raise TcgaugeError("%s: cannot read: %s" % (path, exc.strerror or exc))
    try:
        return tablefile.parse(data)
    except tablefile.TableFileError as exc:
        raise TcgaugeError("%s: %s" % (path, exc))


def summary(path, table, crc):
    """Lines of text describing a good table file."""
    p_lo, p_hi = table.p_min_pa, table.p_max_pa
    e_lo, e_hi = table.emf_range_mv
    return [
        "%s: ok" % path,
        "  gas %s, profile %s, type %s junction, heater %.6g mA, EMFs at ref %.6g C"
        % (table.gas, table.profile, table.tc_type, table.heater_ma, table.ref_c),
        "  %d points, %.4g .. %.4g Pa (%.4g .. %.4g Torr), EMF %.4g .. %.4g mV"
        % (len(table.points), p_lo, p_hi, units.from_pa(p_lo, "TORR"),
           units.from_pa(p_hi, "TORR"), e_lo, e_hi),
        "  source: %s" % table.source,
        "  crc32 0x%08x (verified)" % crc,
    ]


def _cmd_check(args):
    table, crc = check_file(args.file)
    print("\n".join(summary(args.file, table, crc)))
    return 0


def _unit(name):
    try:
        units.from_pa(1.0, name)
    except ValueError as exc:
        raise TcgaugeError(str(exc))
    return name.upper()


def _sidecar(path, crc):
    """The band beside table file `path` (None if there is none). Raises TcgaugeError if stale."""
    from tcgauge import band

    bpath = band.band_path(path)
    if not os.path.exists(bpath):
        return None
    return band.load(bpath, crc)


def _band_path(path):
    from tcgauge import band  # imported late: numpy is not needed by `check`

    return band.band_path(path)


def show_lines(path, table, crc, unit="TORR", band=None):
    """Plain-text lines listing a table: metadata, range, checksum, points."""
    sym = units.SYMBOL[unit]
    lines = summary(path, table, crc)
    lines.append("  invalid above %.6g mV (margin %.4g) or below %.6g mV"
                 % (table.emf_invalid_above_mv, table.invalid_margin, -table.noise_mv))
    pa = unit != "PA"  # a second column in pascals unless the unit is already Pa
    head = "  %3s  %10s  %12s" % ("#", "EMF mV", "p " + sym) + ("  %12s" % "p Pa" if pa else "")
    if band is not None:
        lines.append("  band from %s: %s" % (os.path.basename(_band_path(path)), band.summary()))
        head += "  %12s  %12s" % ("lower " + sym, "upper " + sym)
    lines.append(head)
    for i, (e, p) in enumerate(table.points):
        row = "  %3d  %10.5f  %12.5g" % (i, e, units.from_pa(p, unit)) + ("  %12.5g" % p if pa else "")
        if band is not None:
            row += "  %12.5g  %12.5g" % (units.from_pa(band.lower_pa[i], unit),
                                         units.from_pa(band.upper_pa[i], unit))
        lines.append(row)
    return lines


def _cmd_show(args):
    unit = _unit(args.unit)
    table, crc = check_file(args.file)
    print("\n".join(show_lines(args.file, table, crc, unit, _sidecar(args.file, crc))))
    return 0


def _cmd_plot(args):
    from tcgauge import tableplot

    unit = _unit(args.unit)
    tables, bands = [], []
    for path in args.files:
        table, crc = check_file(path)
        tables.append(table)
        bands.append(_sidecar(path, crc))
    try:
        tableplot.plot_tables(args.output, tables, bands, unit)
    except OSError as exc:
        raise TcgaugeError("cannot write %s: %s" % (args.output, exc.strerror or exc))
    print("%s: %d table(s)%s" % (args.output, len(tables),
                                 ", bands shaded" if any(b is not None for b in bands) else ""))
    return 0


def _cmd_derive(args):
    from tcgauge import derive

    unit = _unit(args.unit)
    n2, _ = check_file(args.file)
    p_min = None if args.p_min is None else units.to_pa(args.p_min, unit)
    p_max = None if args.p_max is None else units.to_pa(args.p_max, unit)
    if not args.force:
        for target in (args.output, _band_path(args.output)):
            if os.path.exists(target):
                raise TcgaugeError("%s exists; use --force to overwrite" % target)
    d = derive.derive_table(n2, args.gas, profile=args.profile, p_min_pa=p_min, p_max_pa=p_max,
                            points=args.points, t_wall_c=args.wall_c)
    bpath = derive.write(d, args.output, force=args.force)
    out = d.fit.summary()
    out.append("derived %s" % d.table.describe())
    out.append(d.band.summary())
    out.append("wrote %s and %s" % (args.output, bpath))
    for w in d.warnings:
        out.append("warning: %s" % w)
    if not d.warnings:
        out.append("no warnings: the requested range lies where the derivation is well supported")
    print("\n".join(out))
    return 0


class _Session:
    """Port, Link and Client of a device verb; closes the port on exit."""

    def __init__(self, port_name, timeout_s):
        from tcgauge.client import Client
        from tcgauge.cmd_info import open_port
        from tcgauge.link import Link

        self.port_name = port_name
        self.port = open_port(port_name)
        self.client = Client(Link(self.port, timeout_s=timeout_s))

    def __enter__(self):
        from tcgauge.link import LinkTimeout

        try:
            self.client.open()
        except LinkTimeout as exc:
            self.port.close()
            raise TcgaugeError("%s: %s (is the tcgauge firmware running?)" % (self.port_name, exc))
        return self.client

    def __exit__(self, *exc):
        self.port.close()


def _progress_printer(stream):
    """progress(sent, total) for a plain stream: one line per quarter."""
    state = {"next": 0.25}

    def progress(sent, total):
        while total and sent / total >= state["next"] - 1e-9:
            print("sent %d of %d bytes" % (sent, total), file=stream)
            state["next"] += 0.25

    return progress


def _cmd_push(args):
    import sys

    from tcgauge import transfer

    check_file(args.file)  # a bad file fails here, before the port is opened
    with _Session(args.port, args.timeout) as client:
        if sys.stdout.isatty():
            from rich.progress import Progress

            with Progress(transient=True) as bar:
                task = bar.add_task("push %s" % os.path.basename(args.file), total=None)

                def progress(sent, total):
                    bar.update(task, completed=sent, total=total)

                res = transfer.push(client, args.file, args.channel, args.name, progress)
        else:
            res = transfer.push(client, args.file, args.channel, args.name, _progress_printer(sys.stdout))
    where = "channel %d" % res.channel if res.channel else "the catalogue"
    print("pushed %s as %s to %s: %d bytes in %d chunks%s, crc32 0x%08x verified"
          % (args.file, res.name, where, res.nbytes, res.chunks,
             " (%d resent)" % res.retries if res.retries else "", res.crc32))
    return 0


def _cmd_pull(args):
    from tcgauge import transfer

    with _Session(args.port, args.timeout) as client:
        text = transfer.pull(client, args.name)
    if os.path.exists(args.output) and not args.force:
        raise TcgaugeError("%s exists; use --force to overwrite" % args.output)
    data = text.encode("utf-8")
    try:
        with open(args.output, "wb") as f:
            f.write(data)
    except OSError as exc:
        raise TcgaugeError("cannot write %s: %s" % (args.output, exc.strerror or exc))
    print("pulled %s: %d bytes, crc32 0x%08x verified, written to %s"
          % (args.name, len(data), tablefile.parse(data)[1], args.output))
    return 0


def _cmd_list(args):
    from tcgauge import transfer

    with _Session(args.port, args.timeout) as client:
        lst = transfer.listing(client)
    print("\n".join(lst.lines()))
    return 0


def _device_args(p):
    p.add_argument("--port", required=True, help="serial port or URL (e.g. /dev/ttyACM0, sim://)")
    p.add_argument("--timeout", type=float, default=2.0, metavar="S",
                   help="seconds to wait for each reply (default 2)")


def register(subparsers):
    """Add the `table` verb group to the top-level sub-parsers."""
    parser = subparsers.add_parser("table", help="check and manage gas table files")
    verbs = parser.add_subparsers(dest="table_verb", metavar="TABLE_VERB")
    check = verbs.add_parser("check", help="verify a table file (CRC and rules) and summarise it")
    check.add_argument("file", metavar="FILE", help="table file (tcgauge-table JSON)")
    check.set_defaults(func=_cmd_check)

    show = verbs.add_parser("show", help="list a table file's points, metadata and checksum")
    show.add_argument("file", metavar="FILE", help="table file (tcgauge-table JSON)")
    show.add_argument("--unit", default="TORR", help="pressure unit: PA, TORR, MBAR or MICRON")
    show.set_defaults(func=_cmd_show)

    plot = verbs.add_parser("plot", help="plot tables (EMF against pressure) to a PNG")
    plot.add_argument("files", metavar="FILE", nargs="+", help="table files")
    plot.add_argument("-o", "--output", required=True, help="PNG file to write")
    plot.add_argument("--unit", default="TORR", help="pressure unit: PA, TORR, MBAR or MICRON")
    plot.set_defaults(func=_cmd_plot)

    der = verbs.add_parser("derive", help="derive a table for another gas from an N2 table")
    der.add_argument("file", metavar="N2FILE", help="measured N2 table file of the tube")
    der.add_argument("--gas", required=True, help="target gas: He, Ar, H2, CO2, H2O or air")
    der.add_argument("-o", "--output", required=True, help="derived table file to write")
    der.add_argument("--profile", default="wren-demo", help="base tube profile of the model")
    der.add_argument("--p-min", type=float, default=None, help="lowest pressure, in --unit")
    der.add_argument("--p-max", type=float, default=None, help="highest pressure, in --unit")
    der.add_argument("--unit", default="TORR", help="unit of --p-min/--p-max")
    der.add_argument("--points", type=int, default=None, help="points (default: as the N2 table)")
    der.add_argument("--wall-c", type=float, default=22.0,
                     help="wall temperature of the N2 measurement, C (default 22)")
    der.add_argument("--force", action="store_true", help="overwrite existing output files")
    der.set_defaults(func=_cmd_derive)

    push = verbs.add_parser("push", help="send a table file to the device and install it")
    push.add_argument("file", metavar="FILE", help="table file (tcgauge-table JSON)")
    _device_args(push)
    push.add_argument("--channel", type=int, default=None, metavar="N",
                      help="switch channel N to the table (default: catalogue only)")
    push.add_argument("--name", default=None, help="name on the device (default: the file's stem)")
    push.set_defaults(func=_cmd_push)

    pull = verbs.add_parser("pull", help="fetch a table from the device")
    pull.add_argument("name", metavar="NAME", help="table name on the device (see `table list`)")
    _device_args(pull)
    pull.add_argument("-o", "--output", required=True, help="table file to write")
    pull.add_argument("--force", action="store_true", help="overwrite an existing file")
    pull.set_defaults(func=_cmd_pull)

    lst = verbs.add_parser("list", help="list the device's tables and the table of each channel")
    _device_args(lst)
    lst.set_defaults(func=_cmd_list)

    def _no_verb(args):
        parser.print_help()
        return 2

    parser.set_defaults(func=_no_verb)
