"""Stream records: one text line per sample, with its own checksum.

    !R,<seq>,<t_ms>,<ch>,<emf_mv>,<t_c>,<pressure_pa>,<state>,<fault>*<CRC>

- '!' starts every record and nothing else: an IEEE 488.2 reply begins with
  a digit, a sign, a letter, a quote or '#' (block data), never with '!'.
- seq counts records of the device, all channels together, modulo SEQ_MOD.
- emf_mv, t_c and pressure_pa are empty when there is no number; the
  pressure is always empty for the states 'invalid' and 'fault'.
- fault is the fault name when the state is 'fault', else empty.
- CRC: CRC-16/IBM-3740 (also called CRC-16/CCITT-FALSE; width 16, poly
  0x1021, init 0xFFFF, no reflection, xorout 0, check 0x29B1 for
  "123456789"; Greg Cook, Catalogue of parametrised CRC algorithms) of
  every character before the '*', as 4 upper-case hex digits. A 16-bit CRC
  detects every error burst of up to 16 bits, so every single changed
  character. It stays in small integers on the board (a CRC-32 would not).
"""

from gaugecore import states
from gaugecore.compat import const

PREFIX = "!R,"
SEQ_MOD = const(1000000000)  # sequence numbers wrap here (stays a small int)
_FIELDS = const(8)  # after the prefix: seq .. fault


def _make_table():
    table = []
    for i in range(256):
        crc = i << 8
        for _ in range(8):
            if crc & 0x8000:
                crc = ((crc << 1) ^ 0x1021) & 0xFFFF
            else:
                crc = (crc << 1) & 0xFFFF
        table.append(crc)
    return table


_TABLE = _make_table()


def crc16(data):
    """CRC-16/IBM-3740 of a str (ASCII) or bytes."""
    crc = 0xFFFF
    table = _TABLE
    if isinstance(data, str):
        for c in data:
            crc = ((crc << 8) & 0xFFFF) ^ table[((crc >> 8) ^ ord(c)) & 0xFF]
    else:
        for b in data:
            crc = ((crc << 8) & 0xFFFF) ^ table[((crc >> 8) ^ b) & 0xFF]
    return crc


def encode(seq, t_ms, ch, emf_mv, t_c, pressure_pa, state, fault):
    """One record line (no newline). Numbers may be None; see the module doc."""
    if state == states.INVALID or state == states.FAULT or pressure_pa is None:
        p = ""
    else:
        p = "%.4E" % pressure_pa
    body = "%s%d,%d,%d,%s,%s,%s,%s,%s" % (
        PREFIX,
        seq % SEQ_MOD,
        t_ms,
        ch,
        "" if emf_mv is None else "%.4f" % emf_mv,
        "" if t_c is None else "%.2f" % t_c,
        p,
        state,
        (fault or "") if state == states.FAULT else "",
    )
    return "%s*%04X" % (body, crc16(body))


def is_record(line):
    """True if `line` (str or bytes) is meant as a record (it may still be corrupt)."""
    if isinstance(line, str):
        return line.startswith("!")
    return line.startswith(b"!")


class Record:
    """A decoded record; numbers are None where the record has none."""

    def __init__(self, seq, t_ms, ch, emf_mv, t_c, pressure_pa, state, fault):
        self.seq = seq
        self.t_ms = t_ms
        self.ch = ch
        self.emf_mv = emf_mv
        self.t_c = t_c
        self.pressure_pa = pressure_pa
        self.state = state
        self.fault = fault

    def fields(self):
        """The fields as a tuple, in record order."""
        return (self.seq, self.t_ms, self.ch, self.emf_mv, self.t_c, self.pressure_pa,
                self.state, self.fault)

    def __eq__(self, other):
        return isinstance(other, Record) and self.fields() == other.fields()

    def __repr__(self):
        return "Record%r" % (self.fields(),)


def _uint(text, what):
    if not text or not text.isdigit():
        raise ValueError("record field %s is not an unsigned integer" % what)
    return int(text)


def _num(text, what):
    if text == "":
        return None
    for c in text:
        if c not in "+-.0123456789E":
            raise ValueError("record field %s is not a number" % what)
    try:
        return float(text)
    except ValueError:
        raise ValueError("record field %s is not a number" % what)


def decode(line):
    """Record line (str or bytes, newline optional) -> Record; ValueError with the reason."""
    if not isinstance(line, str):
        try:
            line = bytes(line).decode()
        except UnicodeError:
            raise ValueError("record is not ASCII text")
    while line and line[-1] in "\r\n":
        line = line[:-1]
    if not line.startswith(PREFIX):
        raise ValueError("record does not start with %s" % PREFIX)
    star = line.rfind("*")
    if star < 0 or len(line) - star != 5:
        raise ValueError("record has no checksum")
    body = line[:star]
    check = line[star + 1 :]
    for c in check:
        if c not in "0123456789ABCDEF":
            raise ValueError("record checksum is not upper-case hex")
    if int(check, 16) != crc16(body):
        raise ValueError("record checksum mismatch")
    parts = body[len(PREFIX) :].split(",")
    if len(parts) != _FIELDS:
        raise ValueError("record has %d fields, expected %d" % (len(parts), _FIELDS))
    seq = _uint(parts[0], "seq")
    if seq >= SEQ_MOD:
        raise ValueError("record seq out of range")
    t_ms = _uint(parts[1], "t_ms")
    ch = _uint(parts[2], "ch")
    if ch < 1:
        raise ValueError("record channel must be >= 1")
    emf_mv = _num(parts[3], "emf_mv")
    t_c = _num(parts[4], "t_c")
    pressure_pa = _num(parts[5], "pressure_pa")
    state = parts[6]
    if state not in states.ALL:
        raise ValueError("record state %r unknown" % state)
    fault = parts[7] or None
    if fault is not None:
        for c in fault:
            if not ("a" <= c <= "z" or "0" <= c <= "9" or c == "_" or c == "-"):
                raise ValueError("record fault name has a bad character")
    if (state == states.INVALID or state == states.FAULT) and pressure_pa is not None:
        raise ValueError("record has a pressure for state %s" % state)
    if state in (states.OK, states.UNDER, states.OVER) and pressure_pa is None:
        raise ValueError("record has no pressure for state %s" % state)
    if (state == states.FAULT) != (fault is not None):
        raise ValueError("record fault name and state disagree")
    return Record(seq, t_ms, ch, emf_mv, t_c, pressure_pa, state, fault)


def gap(prev_seq, seq):
    """Records missing between `prev_seq` and `seq` (0 when consecutive), modulo SEQ_MOD."""
    return (seq - prev_seq - 1) % SEQ_MOD
