"""The command set of the serial protocol, defined once, as data.

The device's dispatcher (gaugecore.scpi) and the host's client
(tcgauge.client) are both built from COMMANDS, so they cannot drift.

Conventions: SCPI-1999 Vol. 1 (syntax and style, ch. 6-7) and IEEE 488.2
(common commands, ch. 10; status, ch. 11). A header pattern is written in
SCPI long form with the short form in capitals ("MEASure:EMF"); `[:NODE]`
is an optional node; `#` after a mnemonic is a numeric suffix
("SETPoint#" matches SETP, SETP1, SETPOINT2; omitted means 1).

One record per command, a tuple indexed by the constants below:
  HEADER  header pattern, without '?'
  ARGS    argument specs of the setting form (() if none)
  QARGS   argument specs of the query form
  SETTER  facade method the setting calls, or None (no setting form)
  GETTER  facade method the query calls, or None (no query form)
  REPLY   reply type of the query (R_*), or None
  HELP    one line of help
A method whose name starts with '_' belongs to the dispatcher itself
(status registers, error queue). Arguments are passed to the facade in
order: the header's numeric suffix first (if the pattern has '#'), then
the arguments, the channel list expanded to one call per channel (the
channel first). The subsystem names and command words are our own.
"""

from gaugecore.compat import const

# Record fields.
HEADER = const(0)
ARGS = const(1)
QARGS = const(2)
SETTER = const(3)
GETTER = const(4)
REPLY = const(5)
HELP = const(6)

# Argument kinds (first item of an argument spec tuple).
A_FLOAT = "float"  # ("float", unit, lo, hi): decimal number in `unit`, optional suffix `unit`
A_PRESSURE = "pressure"  # ("pressure", lo_pa, hi_pa): in the selected unit or with a unit suffix
A_INT = "int"  # ("int", lo, hi)
A_BOOL = "bool"  # ("bool",): ON, OFF, 1, 0
A_ENUM = "enum"  # ("enum", ("BELow", "ABOVe")): SCPI character data, short or long form
A_STRING = "string"  # ("string", max_len): quoted with ' or ", quote doubled inside
A_CHANNEL = "channel"  # ("channel",): one channel number, 1..channels
A_CHANLIST = "chanlist"  # ("chanlist", required): (@1), (@1,2), (@1:2); omitted = all

# Reply types of queries.
R_TEXT = "text"  # raw text built by the dispatcher (*IDN?, SYST:ERR?)
R_INT = "int"  # NR1
R_FLOAT = "float"  # NR3, e.g. 1.234500E-01
R_PRESSURE = "pressure"  # NR3 in the selected unit (the facade works in pascals)
R_BOOL = "bool"  # 1 or 0
R_WORD = "word"  # character data: an enum's short form, a unit, a fault name or NONE
R_STRING = "string"  # quoted string
R_STRINGS = "strings"  # comma-separated quoted strings
R_READING = "reading"  # value,UNIT,STATE,FAULT per channel; value NAN when there is none

# Common limits of the protocol (the facade may refuse narrower ranges).
MAX_LINE = const(256)  # longest accepted input line in bytes, terminator excluded
ERROR_QUEUE_LEN = const(16)  # SCPI-1999 Vol. 1 21.8: the queue holds at least 2
MAX_NAME = const(24)  # longest table name
MAX_TABLE_BYTES = const(16384)  # largest table file an upload may announce (gaugecore.store)
UPLOAD_TEXT = const(216)  # longest chunk text of an upload (gaugecore.tablexfer)
MAX_CHUNKS = const(9999)  # highest chunk index
SCPI_VERSION = "1999.0"  # SYSTem:VERSion? (SCPI-1999 Vol. 1 21.21)
MAKER = "tcgauge"
MODEL = "TCGAUGE-2CH"  # our own model name

UNITS = ("PA", "TORR", "MBAR", "MICRON")  # the names gaugecore.units knows

_ALL = ("chanlist", False)  # optional channel list, default all channels
_REQ = ("chanlist", True)  # required channel list

# fmt: off
COMMANDS = (
    # IEEE 488.2 common commands (ch. 10)
    ("*IDN", (), (), None, "_idn", R_TEXT, "identify: maker,model,serial,firmware version"),
    ("*RST", (), (), "reset", None, None, "reset the settings to their defaults"),
    ("*CLS", (), (), "_cls", None, None, "clear the error queue and the event status register"),
    ("*OPC", (), (), "_set_opc", "_opc", R_INT, "operation complete (commands run in order: always 1)"),
    ("*WAI", (), (), "_wai", None, None, "wait for pending operations (none are ever pending)"),
    ("*TST", (), (), None, "self_test", R_INT, "self test: 0 passed, otherwise a fault code"),
    ("*ESR", (), (), None, "_esr", R_INT, "read and clear the standard event status register"),
    ("*ESE", (("int", 0, 255),), (), "_set_ese", "_ese", R_INT, "standard event status enable mask"),
    ("*STB", (), (), None, "_stb", R_INT, "status byte: 4 error queue not empty, 32 event summary"),
    # SCPI-1999 required SYSTem commands (Vol. 1 ch. 21)
    ("SYSTem:ERRor[:NEXT]", (), (), None, "_error", R_TEXT, "oldest error: number,\"message\" (0,\"No error\")"),
    ("SYSTem:ERRor:COUNt", (), (), None, "_error_count", R_INT, "number of errors in the queue"),
    ("SYSTem:VERSion", (), (), None, "_version", R_TEXT, "SCPI version this device follows"),
    # diagnostics of the board itself
    ("DIAGnostic:MEMory:FREE", (), (), None, "memory_free", R_INT,
     "free heap in bytes after a garbage collection; -1 where the interpreter cannot tell"),
    # measurement, per channel
    ("MEASure[:PRESsure]", (), (_ALL,), None, "pressure", R_READING,
     "pressure in the selected unit with its state and fault; NAN when there is no number"),
    ("MEASure:EMF", (), (_ALL,), None, "emf_mv", R_FLOAT, "thermocouple EMF in mV"),
    ("MEASure:JUNCtion", (), (_ALL,), None, "junction_c", R_FLOAT, "cold-junction temperature in C"),
    ("MEASure:HEATer", (), (_ALL,), None, "heater_ma", R_FLOAT, "measured heater current in mA"),
    # configuration
    ("CONFigure:TABLe", (("string", MAX_NAME), _REQ), (_ALL,), "set_table", "table", R_STRING,
     "conversion table (tube and gas) of the channels"),
    ("CONFigure:UNIT", (("enum", UNITS),), (), "set_unit", "unit", R_WORD,
     "pressure unit of replies and pressure arguments"),
    ("CONFigure:RATE", (("float", "HZ", 0.1, 50.0),), (), "set_rate_hz", "rate_hz", R_FLOAT,
     "sample rate in Hz"),
    ("CONFigure:HEATer", (("float", "MA", 1.0, 250.0), _REQ), (_ALL,), "set_heater_target_ma",
     "heater_target_ma", R_FLOAT, "heater current setpoint in mA"),
    ("CONFigure:FAST", (("bool",), _REQ), (_ALL,), "set_fast", "fast", R_BOOL,
     "fast-response estimate on or off"),
    # setpoints: SETPoint1, SETPoint2, ... each drives one relay
    ("SETPoint#:SOURce", (("channel",),), (), "set_sp_source", "sp_source", R_INT,
     "channel whose pressure the setpoint watches"),
    ("SETPoint#:ONLevel", (("pressure", 1e-3, 1.2e5),), (), "set_sp_on_pa", "sp_on_pa", R_PRESSURE,
     "pressure at which the relay switches on"),
    ("SETPoint#:OFFLevel", (("pressure", 1e-3, 1.2e5),), (), "set_sp_off_pa", "sp_off_pa", R_PRESSURE,
     "pressure at which the relay switches off (the gap is the hysteresis)"),
    ("SETPoint#:DIRection", (("enum", ("BELow", "ABOVe")),), (), "set_sp_direction", "sp_direction",
     R_WORD, "relay on below or above the on level"),
    ("SETPoint#:DELay", (("float", "S", 0.0, 600.0),), (), "set_sp_delay_s", "sp_delay_s", R_FLOAT,
     "time in s the condition must hold before the relay changes"),
    ("SETPoint#:ENABle", (("bool",),), (), "set_sp_enable", "sp_enable", R_BOOL,
     "setpoint enabled; a disabled setpoint holds its relay off"),
    ("SETPoint#:RELay", (), (), None, "sp_relay", R_BOOL, "relay state: 1 energised, 0 released"),
    # vacuum zero, faults, streaming
    ("CALibrate:ZERO", (_REQ,), (_ALL,), "zero", "zero_mv", R_FLOAT,
     "take the vacuum zero now (tube at high vacuum); query: zero offset in mV"),
    ("STATus:FAULt", (), (_ALL,), None, "fault", R_WORD, "fault name of the channels, or NONE"),
    ("STATus:CLEar", (_REQ,), (), "clear_fault", None, None, "clear latched faults of the channels"),
    ("STReam[:STATe]", (("bool",),), (), "set_stream", "stream", R_BOOL,
     "stream records on or off (see record.py)"),
    # table subsystem: catalogue, checksums, chunked upload and download (gaugecore.tablexfer)
    ("TABLe:CATalog", (), (), None, "tables", R_STRINGS, "names of the tables on the device"),
    ("TABLe:CRC", (), (("string", MAX_NAME),), None, "table_crc", R_STRING,
     "CRC-32 of a catalogue table file, '0x' and 8 hex digits"),
    ("TABLe:ACTive", (), (_ALL,), None, "active_crc", R_STRING,
     "CRC-32 of the table each channel converts with"),
    ("TABLe:UPLoad:BEGin", (("string", MAX_NAME), ("int", 0, 99), ("int", 1, MAX_TABLE_BYTES),
                            ("string", 10)), (), "upload_begin", None, None,
     "start an upload: name, channel (0: catalogue only), bytes, CRC-32 of the file"),
    ("TABLe:UPLoad:DATA", (("int", 0, MAX_CHUNKS), ("string", UPLOAD_TEXT), ("int", 0, 65535)), (),
     "upload_data", None, None, "one chunk: index, base64 text, CRC-16 of its bytes"),
    ("TABLe:UPLoad:NEXT", (), (), None, "upload_next", R_INT,
     "index of the chunk the upload expects next; -1 when none is open"),
    ("TABLe:UPLoad:END", (), (), None, "upload_end", R_STRING,
     "check and install the uploaded table; reply: its CRC-32"),
    ("TABLe:UPLoad:ABORt", (), (), "upload_abort", None, None,
     "drop the upload in progress (nothing is installed)"),
    ("TABLe:DOWNload", (), (("string", MAX_NAME), ("int", 0, MAX_CHUNKS)), None, "table_chunk",
     R_STRINGS, "chunk of a catalogue table: CRC-16 and base64 text; empty past the end"),
)
# fmt: on

# Subsystem names kept for later issues (none at present).
RESERVED = ()

# Error and event numbers with their standard messages:
# SCPI-1999 Vol. 1 ch. 21.8 (21.8.9 command errors, 21.8.10 execution errors,
# 21.8.11 device-specific errors).
E_NONE = const(0)
E_COMMAND = const(-100)
E_CHAR = const(-101)
E_SYNTAX = const(-102)
E_DATA_TYPE = const(-104)
E_PARAM_NOT_ALLOWED = const(-108)
E_MISSING_PARAM = const(-109)
E_UNDEFINED_HEADER = const(-113)
E_HEADER_SUFFIX = const(-114)
E_SUFFIX = const(-131)
E_STRING = const(-151)
E_EXECUTION = const(-200)
E_CONFLICT = const(-221)
E_RANGE = const(-222)
E_ILLEGAL_VALUE = const(-224)
E_QUEUE_OVERFLOW = const(-350)
E_INPUT_OVERRUN = const(-363)

ERRORS = {
    E_NONE: "No error",
    E_COMMAND: "Command error",
    E_CHAR: "Invalid character",
    E_SYNTAX: "Syntax error",
    E_DATA_TYPE: "Data type error",
    E_PARAM_NOT_ALLOWED: "Parameter not allowed",
    E_MISSING_PARAM: "Missing parameter",
    E_UNDEFINED_HEADER: "Undefined header",
    E_HEADER_SUFFIX: "Header suffix out of range",
    E_SUFFIX: "Invalid suffix",
    E_STRING: "Invalid string data",
    E_EXECUTION: "Execution error",
    E_CONFLICT: "Settings conflict",
    E_RANGE: "Data out of range",
    E_ILLEGAL_VALUE: "Illegal parameter value",
    E_QUEUE_OVERFLOW: "Queue overflow",
    E_INPUT_OVERRUN: "Input buffer overrun",
}


class RangeError(ValueError):
    """A facade raises this for a value outside its range: error -222."""


class ConflictError(ValueError):
    """A facade raises this when a value conflicts with other settings: -221.

    A plain ValueError from the facade becomes -224 (illegal value).
    """


def ident(serial, firmware):
    """The four *IDN? fields (IEEE 488.2 10.14): maker, model, serial, firmware."""
    return (MAKER, MODEL, serial, firmware)


def is_query(record):
    """True if the command has a query form."""
    return record[GETTER] is not None


def is_setting(record):
    """True if the command has a setting form."""
    return record[SETTER] is not None


def short_form(mnemonic):
    """'MEASure' -> 'MEAS', 'SETPoint#' -> 'SETP#', '*IDN' -> '*IDN'."""
    out = ""
    for c in mnemonic:
        if c == "#" or c == "*" or ("A" <= c <= "Z") or ("0" <= c <= "9"):
            out += c
    return out


def nodes(header):
    """Split a header pattern into (mnemonic, optional) pairs.

    'SYSTem:ERRor[:NEXT]' -> [('SYSTem', False), ('ERRor', False), ('NEXT', True)]
    """
    out = []
    i = 0
    n = len(header)
    while i < n:
        optional = header[i] == "["
        if optional:
            end = header.index("]", i)
            part = header[i + 1 : end]
            i = end + 1
        else:
            end = i
            while end < n and header[end] != "[" and (end == i or header[end] != ":"):
                end += 1
            part = header[i:end]
            i = end
        if part.startswith(":"):
            part = part[1:]
        out.append((part, optional))
    return out


def channel_arg(specs):
    """Index of the channel-list spec in `specs`, or -1."""
    for i in range(len(specs)):
        if specs[i][0] == A_CHANLIST:
            return i
    return -1


def forms(record):
    """The header as a user types it: ('MEASure[:PRESsure]?',) or both forms."""
    out = []
    if is_setting(record):
        out.append(record[HEADER])
    if is_query(record):
        out.append(record[HEADER] + "?")
    return tuple(out)
