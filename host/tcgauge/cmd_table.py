"""`tcgauge table ...`: verbs on gas table files.

`tcgauge table check FILE` reads a table file, verifies its CRC and every
table rule, and prints a short summary (exit 0); a bad file gives one line
on stderr naming the problem and exit status 2. The `table` group is where
later verbs (show, plot, derive, push, pull, list) are added: one
sub-parser each in `register`.
"""

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


def register(subparsers):
    """Add the `table` verb group to the top-level sub-parsers."""
    parser = subparsers.add_parser("table", help="check and manage gas table files")
    verbs = parser.add_subparsers(dest="table_verb", metavar="TABLE_VERB")
    check = verbs.add_parser("check", help="verify a table file (CRC and rules) and summarise it")
    check.add_argument("file", metavar="FILE", help="table file (tcgauge-table JSON)")
    check.set_defaults(func=_cmd_check)

    def _no_verb(args):
        parser.print_help()
        return 2

    parser.set_defaults(func=_no_verb)
