"""SCPI parser and dispatcher built from gaugecore.commands.

`Dispatcher(facade, ident)` binds every command of COMMANDS to a method of
`facade` by name (see commands.py for the calling convention) and answers
lines: `handle_line(line) -> reply or None`. It never raises: a line gets a
reply, or an entry in the bounded error queue (SCPI-1999 Vol. 1 21.8), or
both when some of its commands fail. `LineFramer` cuts a byte stream into
lines of bounded length. No `re`: MicroPython's is too limited.
"""

from gaugecore import commands as C
from gaugecore import states
from gaugecore import units

_MAX_DETAIL = 60  # longest device-dependent detail kept in an error entry
_INF = 1e300 * 1e300


class ScpiError(Exception):
    """A parse or argument error: args are (SCPI error number, detail); never escapes.

    The values live in `args`: MicroPython cannot set attributes on exceptions.
    """

    @property
    def code(self):
        return self.args[0]

    @property
    def detail(self):
        return self.args[1] if len(self.args) > 1 else None


def split_top(text, sep):
    """Split `text` at `sep` outside quotes and parentheses.

    Raises ScpiError(-102) on an unterminated string or unbalanced '('.
    """
    out = []
    start = 0
    quote = None
    depth = 0
    i = 0
    n = len(text)
    while i < n:
        c = text[i]
        if quote is not None:
            if c == quote:
                if i + 1 < n and text[i + 1] == quote:
                    i += 1  # doubled quote inside a string
                else:
                    quote = None
        elif c == '"' or c == "'":
            quote = c
        elif c == "(":
            depth += 1
        elif c == ")":
            depth -= 1
            if depth < 0:
                raise ScpiError(C.E_SYNTAX, "unbalanced parenthesis")
        elif c == sep and depth == 0:
            out.append(text[start:i])
            start = i + 1
        i += 1
    if quote is not None:
        raise ScpiError(C.E_SYNTAX, "unterminated string")
    if depth != 0:
        raise ScpiError(C.E_SYNTAX, "unbalanced parenthesis")
    out.append(text[start:])
    return out


def quote(text):
    """IEEE 488.2 string response data: double quotes, inner quotes doubled."""
    return '"' + text.replace('"', '""') + '"'


def unquote(text):
    """Quoted string program data -> its text; ScpiError if not a string."""
    if len(text) < 2 or text[0] not in "\"'":
        raise ScpiError(C.E_DATA_TYPE, "expected a quoted string")
    q = text[0]
    if text[-1] != q:
        raise ScpiError(C.E_STRING, "unterminated string")
    inner = text[1:-1]
    doubled = q + q
    if inner.replace(doubled, "").find(q) >= 0:
        raise ScpiError(C.E_STRING, "lone quote inside string")
    return inner.replace(doubled, q)


def nr3(value):
    """A float as NR3 ("1.234500E-01"); NAN for None or not-a-number."""
    if value is None or value != value or value == _INF or value == -_INF:
        return "NAN"
    return "%.6E" % value


def _split_number(text):
    """'1.5E-3 TORR' -> ('1.5E-3', 'TORR'); ScpiError if no number leads."""
    n = len(text)
    i = 0
    if i < n and text[i] in "+-":
        i += 1
    digits = 0
    while i < n and "0" <= text[i] <= "9":
        i += 1
        digits += 1
    if i < n and text[i] == ".":
        i += 1
        while i < n and "0" <= text[i] <= "9":
            i += 1
            digits += 1
    if digits == 0:
        raise ScpiError(C.E_DATA_TYPE, "expected a number")
    if i < n and text[i] in "eE":
        j = i + 1
        if j < n and text[j] in "+-":
            j += 1
        k = j
        while k < n and "0" <= text[k] <= "9":
            k += 1
        if k > j:
            i = k
    return text[:i], text[i:].strip()


def _number(text):
    """Decimal numeric program data -> (float, suffix)."""
    num, suffix = _split_number(text)
    try:
        value = float(num)
    except ValueError:
        raise ScpiError(C.E_DATA_TYPE, "bad number")
    if value != value or value == _INF or value == -_INF:
        raise ScpiError(C.E_RANGE, "number too large")
    return value, suffix


def _fmt_range(lo, hi, unit):
    return "%s..%s %s" % (nr3(lo), nr3(hi), unit)


def _class_bit(code):
    """Standard event status bit set by an error (IEEE 488.2 11.5.1)."""
    if -200 < code <= -100:
        return 32  # CME command error
    if -300 < code <= -200:
        return 16  # EXE execution error
    if -400 < code <= -300:
        return 8  # DDE device-dependent error
    if -500 < code <= -400:
        return 4  # QYE query error
    return 0


class Dispatcher:
    """Answers protocol lines by calling `facade` (see gaugecore.commands)."""

    def __init__(self, facade, ident, channels=2, setpoints=2, queue_len=C.ERROR_QUEUE_LEN,
                 max_line=C.MAX_LINE):
        if len(ident) != 4:
            raise ValueError("ident needs 4 fields: maker, model, serial, firmware")
        for field in ident:
            if "," in field or ";" in field or "\n" in field:
                raise ValueError("ident field %r contains , ; or newline" % (field,))
        if channels < 1 or setpoints < 0 or queue_len < 2:
            raise ValueError("need channels >= 1, setpoints >= 0, queue_len >= 2")
        self._facade = facade
        self._ident = ",".join(ident)
        self.channels = channels
        self.setpoints = setpoints
        self.max_line = max_line
        self._qlen = queue_len
        self._queue = []  # (code, text), oldest first
        self._esr_reg = 0
        self._ese_reg = 0
        self._path = ()  # header path for relative compound commands
        self._path_suffix = 1  # and the numeric suffix that came with it
        self._tokens = {}  # typed mnemonic (upper) -> node key (short form, '#' kept)
        self._table = {}  # "KEY:KEY" + "?"/"" -> (record, callable or None, method name)
        self._all = tuple(range(1, channels + 1))
        self.framer = LineFramer(max_line, self)
        for rec in C.COMMANDS:
            self._add(rec)

    # ---- table construction -------------------------------------------------
    def _bind(self, name):
        if name is None:
            return None
        if name[0] == "_":
            return getattr(self, name)
        return getattr(self._facade, name, None)

    def _add(self, rec):
        keys = [[]]
        for mnemonic, optional in C.nodes(rec[C.HEADER]):
            key = C.short_form(mnemonic)
            for typed in (key.replace("#", ""), mnemonic.replace("#", "").upper()):
                old = self._tokens.get(typed)
                if old is not None and old != key:
                    raise ValueError("mnemonic %s is ambiguous" % typed)
                self._tokens[typed] = key
            grown = [k + [key] for k in keys]
            keys = keys + grown if optional else grown
        for k in keys:
            path = ":".join(k)
            for query, name in ((False, rec[C.SETTER]), (True, rec[C.GETTER])):
                if name is not None:
                    full = path + ("?" if query else "")
                    if full in self._table:
                        raise ValueError("header %s defined twice" % full)
                    self._table[full] = (rec, self._bind(name), name)

    def unbound(self):
        """Sorted names of facade methods the table needs but the facade lacks."""
        names = []
        for rec, fn, name in self._table.values():
            if fn is None and name not in names:
                names.append(name)
        names.sort()
        return names

    # ---- error queue and status -----------------------------------------------
    def push_error(self, code, detail=None):
        """Queue error `code` with an optional detail; overflow per SCPI-1999 21.8."""
        self._esr_reg |= _class_bit(code)
        text = C.ERRORS.get(code, "Error")
        if detail:
            text = text + ";" + detail[:_MAX_DETAIL]
        if len(self._queue) >= self._qlen:
            self._queue[-1] = (C.E_QUEUE_OVERFLOW, C.ERRORS[C.E_QUEUE_OVERFLOW])
        else:
            self._queue.append((code, text))

    def errors(self):
        """The queued (code, text) pairs, oldest first (for tests and the display)."""
        return list(self._queue)

    def _error(self):
        if not self._queue:
            return '0,"No error"'
        code, text = self._queue.pop(0)
        return "%d,%s" % (code, quote(text))

    def _error_count(self):
        return len(self._queue)

    def _version(self):
        return C.SCPI_VERSION

    def _idn(self):
        return self._ident

    def _cls(self):
        self._queue = []
        self._esr_reg = 0

    def _set_opc(self):
        self._esr_reg |= 1  # commands run in order: the operation is already complete

    def _opc(self):
        return 1

    def _wai(self):
        pass

    def _esr(self):
        value = self._esr_reg
        self._esr_reg = 0
        return value

    def _set_ese(self, mask):
        self._ese_reg = mask

    def _ese(self):
        return self._ese_reg

    def _stb(self):
        stb = 0
        if self._queue:
            stb |= 4  # error/event queue not empty (SCPI-1999 Vol. 1 ch. 9)
        if self._esr_reg & self._ese_reg:
            stb |= 32  # event status summary (IEEE 488.2 11.2.1.2)
        return stb

    # ---- lines ------------------------------------------------------------------
    def feed(self, data):
        """Bytes from the port -> list of replies for the complete lines in them."""
        replies = []
        for line in self.framer.feed(data):
            reply = self.handle_line(line)
            if reply is not None:
                replies.append(reply)
        return replies

    def handle_line(self, line):
        """Run one program message; return the reply text, or None if it has none."""
        try:
            return self._handle(line)
        except Exception as exc:  # the device must stay up, whatever arrives
            try:
                self.push_error(C.E_EXECUTION, "internal " + type(exc).__name__)
            except Exception:
                pass
            return None

    def _handle(self, line):
        if isinstance(line, str):
            text = line
        else:
            for b in line:
                if (b < 32 or b > 126) and b != 9 and b != 10 and b != 13:
                    self.push_error(C.E_CHAR, "byte 0x%02X" % b)
                    return None
            text = line.decode()
        while text and text[-1] in "\r\n":
            text = text[:-1]
        if len(text) > self.max_line:
            self.push_error(C.E_INPUT_OVERRUN, "line longer than %d" % self.max_line)
            return None
        for c in text:
            o = ord(c)
            if (o < 32 or o > 126) and o != 9:
                self.push_error(C.E_CHAR, "code %d" % o)
                return None
        if not text.strip():
            return None  # an empty program message is legal and does nothing
        try:
            parts = split_top(text, ";")
        except ScpiError as err:
            self.push_error(err.code, err.detail)
            return None
        if len(parts) > 1 and not parts[-1].strip():
            parts.pop()  # tolerate one trailing ';'
        replies = []
        self._path = ()
        for unit in parts:
            try:
                reply = self._unit(unit.strip())
            except ScpiError as err:
                self.push_error(err.code, err.detail)
                continue
            except C.RangeError as exc:
                self.push_error(C.E_RANGE, _message(exc))
                continue
            except C.ConflictError as exc:
                self.push_error(C.E_CONFLICT, _message(exc))
                continue
            except ValueError as exc:
                self.push_error(C.E_ILLEGAL_VALUE, _message(exc))
                continue
            except OSError as exc:
                self.push_error(C.E_EXECUTION, _message(exc))
                continue
            except Exception as exc:
                self.push_error(C.E_EXECUTION, "internal " + type(exc).__name__)
                continue
            if reply is not None:
                replies.append(reply)
        if not replies:
            return None
        return ";".join(replies)

    # ---- one command --------------------------------------------------------------
    def _resolve(self, header):
        """Typed header -> (table entry, suffix, node path or None).

        A header without a leading ':' is first tried relative to the path
        of the previous command on the line (SCPI-1999 Vol. 1 6.2.4), then
        from the root (a lenient extension, so 'MEAS:EMF?;MEAS:JUNC?' works).
        """
        query = header.endswith("?")
        if query:
            header = header[:-1]
        if not header:
            raise ScpiError(C.E_SYNTAX, "empty header")
        tail = "?" if query else ""
        if header[0] == "*":
            if not header[1:].isalpha():
                raise ScpiError(C.E_SYNTAX, "bad header")
            entry = self._table.get(header.upper() + tail)
            if entry is None:
                self._missing(header.upper(), query)
            return entry, 1, None
        absolute = header[0] == ":"
        if absolute:
            header = header[1:]
        keys = []
        suffix = None
        for token in header.split(":"):
            if not token or not _alnum(token):
                raise ScpiError(C.E_SYNTAX, "bad header")
            upper = token.upper()
            key = self._tokens.get(upper)
            if key is None:
                end = len(upper)
                while end > 0 and "0" <= upper[end - 1] <= "9":
                    end -= 1
                key = self._tokens.get(upper[:end])
                if key is None or key[-1] != "#":
                    raise ScpiError(C.E_UNDEFINED_HEADER, header[:_MAX_DETAIL])
                if len(upper) - end > 3:
                    raise ScpiError(C.E_HEADER_SUFFIX, upper[end:][:8])
                suffix = int(upper[end:])
            keys.append(key)
        entry = None
        if not absolute and self._path:
            entry = self._table.get(":".join(self._path + tuple(keys)) + tail)
            if entry is not None:
                keys = list(self._path) + keys
                if suffix is None:
                    suffix = self._path_suffix
        if entry is None:
            entry = self._table.get(":".join(keys) + tail)
        if entry is None:
            self._missing(":".join(keys), query)
        if suffix is None:
            suffix = 1
        self._path_suffix = suffix
        return entry, suffix, tuple(keys[:-1])

    def _missing(self, path, query):
        other = self._table.get(path if query else path + "?")
        if other is not None:
            raise ScpiError(C.E_UNDEFINED_HEADER, "%s has no %s form" % (path, "query" if query else "setting"))
        raise ScpiError(C.E_UNDEFINED_HEADER, path[:_MAX_DETAIL])

    def _unit(self, unit):
        if not unit:
            raise ScpiError(C.E_SYNTAX, "empty command")
        cut = 0
        n = len(unit)
        while cut < n and unit[cut] not in " \t":
            cut += 1
        header = unit[:cut]
        rest = unit[cut:].strip()
        entry, suffix, path = self._resolve(header)
        if path is not None:
            self._path = path
        rec, fn, name = entry
        query = header.endswith("?")
        specs = rec[C.QARGS] if query else rec[C.ARGS]
        if "#" in rec[C.HEADER]:
            if suffix < 1 or suffix > self.setpoints:
                raise ScpiError(C.E_HEADER_SUFFIX, "%d not in 1..%d" % (suffix, self.setpoints))
        raw = split_top(rest, ",") if rest else []
        for text in raw:
            if not text.strip():
                raise ScpiError(C.E_SYNTAX, "empty parameter")
        if len(raw) > len(specs):
            raise ScpiError(C.E_PARAM_NOT_ALLOWED, "%d given, %d allowed" % (len(raw), len(specs)))
        values = []
        chans = None
        for i in range(len(specs)):
            spec = specs[i]
            if i >= len(raw):
                if spec[0] == C.A_CHANLIST and not spec[1]:
                    chans = self._all
                    continue
                raise ScpiError(C.E_MISSING_PARAM, "%d needed" % len(specs))
            text = raw[i].strip()
            if spec[0] == C.A_CHANLIST:
                chans = self._chanlist(text)
            else:
                values.append(self._arg(spec, text))
        if fn is None:
            raise OSError("%s not available" % name)
        lead = (suffix,) if "#" in rec[C.HEADER] else ()
        if chans is None:
            result = fn(*(lead + tuple(values)))
            return self._format(rec, result) if query else None
        out = []
        for ch in chans:
            result = fn(*(lead + (ch,) + tuple(values)))
            if query:
                out.append(self._format(rec, result))
        return ",".join(out) if query else None

    # ---- arguments -----------------------------------------------------------
    def _arg(self, spec, text):
        kind = spec[0]
        if kind == C.A_FLOAT:
            unit, lo, hi = spec[1], spec[2], spec[3]
            value = self._limit(text, lo, hi)
            if value is None:
                value, suffix = _number(text)
                if suffix and suffix.upper() != unit:
                    raise ScpiError(C.E_SUFFIX, "%s (use %s)" % (suffix[:12], unit))
                if value < lo or value > hi:
                    raise ScpiError(C.E_RANGE, "%s not in %s" % (nr3(value), _fmt_range(lo, hi, unit)))
            return value
        if kind == C.A_PRESSURE:
            lo, hi = spec[1], spec[2]
            value = self._limit(text, lo, hi)
            if value is not None:
                return value
            value, suffix = _number(text)
            unit = suffix.upper() if suffix else self._facade.unit().upper()
            if unit not in units.PA_PER_UNIT:
                raise ScpiError(C.E_SUFFIX, "%s (use PA, TORR, MBAR or MICRON)" % suffix[:12])
            value_pa = units.to_pa(value, unit)
            if value_pa < lo or value_pa > hi:
                raise ScpiError(C.E_RANGE, "%s not in %s" % (
                    nr3(value), _fmt_range(units.from_pa(lo, unit), units.from_pa(hi, unit), unit)))
            return value_pa
        if kind == C.A_INT or kind == C.A_CHANNEL:
            if kind == C.A_INT:
                lo, hi = spec[1], spec[2]
            else:
                lo, hi = 1, self.channels
            value = self._limit(text, lo, hi)
            if value is None:
                value, suffix = _number(text)
                if suffix:
                    raise ScpiError(C.E_SUFFIX, "%s (none allowed)" % suffix[:12])
                if value < lo or value > hi:
                    raise ScpiError(C.E_RANGE, "%s not in %d..%d" % (nr3(value), lo, hi))
            return int(round(value))
        if kind == C.A_BOOL:
            word = text.upper()
            if word == "ON" or word == "1":
                return True
            if word == "OFF" or word == "0":
                return False
            raise ScpiError(C.E_ILLEGAL_VALUE, "%s (use ON, OFF, 1 or 0)" % text[:16])
        if kind == C.A_ENUM:
            word = text.upper()
            for choice in spec[1]:
                if word == choice.upper() or word == C.short_form(choice):
                    return choice.upper()
            raise ScpiError(C.E_ILLEGAL_VALUE, "%s (use %s)" % (text[:16], ", ".join(spec[1])))
        if kind == C.A_STRING:
            value = unquote(text)
            if len(value) > spec[1]:
                raise ScpiError(C.E_RANGE, "string longer than %d" % spec[1])
            return value
        raise ScpiError(C.E_COMMAND, "bad argument spec")

    def _limit(self, text, lo, hi):
        """MIN/MINimum and MAX/MAXimum (SCPI-1999 Vol. 1 7.2.1.1) or None."""
        word = text.upper()
        if word == "MIN" or word == "MINIMUM":
            return lo
        if word == "MAX" or word == "MAXIMUM":
            return hi
        return None

    def _chanlist(self, text):
        """'(@1)', '(@1,2)', '(@1:2)' -> tuple of channel numbers (SCPI-1999 Vol. 1 8.3.2)."""
        if not (text.startswith("(@") and text.endswith(")")):
            raise ScpiError(C.E_DATA_TYPE, "expected a channel list like (@1,2)")
        out = []
        for item in text[2:-1].split(","):
            ends = item.split(":")
            if len(ends) > 2:
                raise ScpiError(C.E_SYNTAX, "bad channel range")
            nums = []
            for e in ends:
                e = e.strip()
                if not e.isdigit():
                    raise ScpiError(C.E_SYNTAX, "bad channel number")
                ch = int(e)
                if ch < 1 or ch > self.channels:
                    raise ScpiError(C.E_RANGE, "channel %d not in 1..%d" % (ch, self.channels))
                nums.append(ch)
            step = 1 if nums[-1] >= nums[0] else -1
            for ch in range(nums[0], nums[-1] + step, step):
                if ch not in out:
                    out.append(ch)
        return tuple(out)

    # ---- replies ---------------------------------------------------------------
    def _format(self, rec, value):
        kind = rec[C.REPLY]
        if kind == C.R_TEXT:
            return value
        if kind == C.R_INT:
            return "%d" % value
        if kind == C.R_FLOAT:
            return nr3(value)
        if kind == C.R_BOOL:
            return "1" if value else "0"
        if kind == C.R_PRESSURE:
            if value is None:
                return "NAN"
            return nr3(units.from_pa(value, self._facade.unit()))
        if kind == C.R_WORD:
            if value is None or value == "":
                return "NONE"
            word = str(value).upper()
            for spec in rec[C.ARGS]:
                if spec[0] == C.A_ENUM:
                    for choice in spec[1]:
                        if word == choice.upper():
                            return C.short_form(choice)
            return word
        if kind == C.R_STRING:
            return quote(value)
        if kind == C.R_STRINGS:
            return ",".join([quote(v) for v in value])
        if kind == C.R_READING:
            pressure_pa, state, fault = value
            if state not in states.ALL:
                raise OSError("unknown state %s" % state)
            unit = self._facade.unit().upper()
            if state == states.INVALID or state == states.FAULT or pressure_pa is None:
                number = "NAN"  # no number for a channel without a valid reading
            else:
                number = nr3(units.from_pa(pressure_pa, unit))
            return "%s,%s,%s,%s" % (number, unit, state.upper(), (fault or "NONE").upper())
        raise OSError("bad reply type")


def _alnum(token):
    for c in token:
        if not ("A" <= c <= "Z" or "a" <= c <= "z" or "0" <= c <= "9"):
            return False
    return True


def _message(exc):
    """Our own text for an exception: its first string argument, or its errno."""
    if exc.args:
        first = exc.args[0]
        if isinstance(first, str):
            return first
        if isinstance(first, int):
            return "errno %d" % first
    return type(exc).__name__


class LineFramer:
    """Cut a byte stream into lines at b'\\n' (a trailing b'\\r' is dropped).

    A line longer than `max_len` bytes is dropped whole and error -363 is
    queued on `errors` (anything with `push_error`), so memory stays bounded
    by `max_len` whatever arrives.
    """

    def __init__(self, max_len=C.MAX_LINE, errors=None):
        self.max_len = max_len
        self.errors = errors
        self.overruns = 0
        self._buf = bytearray()
        self._dropping = False

    def feed(self, data):
        """Take bytes; return the list of complete lines (bytes, terminator removed)."""
        if isinstance(data, str):
            data = data.encode()
        elif not isinstance(data, bytes):
            data = bytes(data)  # MicroPython's bytearray has no find()
        lines = []
        start = 0
        n = len(data)
        while start < n:
            nl = data.find(b"\n", start)
            end = n if nl < 0 else nl
            if not self._dropping:
                if len(self._buf) + (end - start) > self.max_len + 1:  # +1: a '\r' before '\n'
                    self._overrun()
                else:
                    self._buf.extend(data[start:end])
            if nl < 0:
                break
            if not self._dropping:
                line = bytes(self._buf)
                if line.endswith(b"\r"):
                    line = line[:-1]
                if len(line) > self.max_len:
                    self._overrun()
                else:
                    lines.append(line)
            self._buf = bytearray()
            self._dropping = False
            start = nl + 1
        return lines

    def _overrun(self):
        self._dropping = True
        self._buf = bytearray()
        self.overruns += 1
        if self.errors is not None:
            self.errors.push_error(C.E_INPUT_OVERRUN, "line longer than %d" % self.max_len)
