"""Typed client of the controller, generated from gaugecore.commands.

Every command of the table becomes a method of `Client` with the same name
as the facade method it calls on the device, so host and device cannot
drift: `client.set_unit("TORR")`, `client.pressure(1)` -> Reading,
`client.set_sp_on_pa(1, 0.5)`. Arguments come in the facade's order:
setpoint number first (for SETPoint# commands), then the channel (an int,
a list of ints, or None for all channels on queries), then the values.

Each call is one line with `;:SYSTem:ERRor?` appended, so every call gets
a reply and a device error is raised at once as `DeviceError`. Pressures
cross the client in pascals (sent with the PA suffix; replies converted
from the selected unit).
"""

import logging

from gaugecore import commands as C
from gaugecore import units
from gaugecore.scpi import quote, split_top, unquote, ScpiError

from tcgauge.errors import TcgaugeError

log = logging.getLogger(__name__)

_ERROR_QUERY = ":SYST:ERR?"
_NO_CHECK = ("_error", "_error_count")  # queries that read the queue themselves


class DeviceError(TcgaugeError):
    """The device refused a command: SCPI error number and message(s)."""

    def __init__(self, code, message, more=()):
        TcgaugeError.__init__(self, "device error %d: %s" % (code, message))
        self.code = code
        self.message = message
        self.more = tuple(more)  # further (code, message) pairs drained from the queue


class ProtocolError(TcgaugeError):
    """A reply did not have the shape the command table promises."""


class Reading:
    """One channel's pressure: `pressure` in `unit`, None when there is no number."""

    def __init__(self, ch, pressure, unit, state, fault):
        self.ch = ch
        self.pressure = pressure
        self.unit = unit
        self.state = state
        self.fault = fault

    @property
    def pressure_pa(self):
        """The pressure in pascals, or None."""
        return None if self.pressure is None else units.to_pa(self.pressure, self.unit)

    def __eq__(self, other):
        return isinstance(other, Reading) and vars(self) == vars(other)

    def __repr__(self):
        return "Reading(ch=%r, pressure=%r, unit=%r, state=%r, fault=%r)" % (
            self.ch, self.pressure, self.unit, self.state, self.fault)


def header_text(rec, suffix=None):
    """The short header a client sends: 'MEAS', 'SETP2:ONL', '*IDN'."""
    parts = []
    for mnemonic, optional in C.nodes(rec[C.HEADER]):
        if optional:
            continue
        short = C.short_form(mnemonic)
        if short.endswith("#"):
            short = short[:-1] + ("%d" % (1 if suffix is None else suffix))
        parts.append(short)
    return ":".join(parts)


def parse_error(text):
    """'-222,"Data out of range;x"' -> (-222, 'Data out of range;x')."""
    code_text, sep, message = text.partition(",")
    try:
        code = int(code_text)
        return code, unquote(message.strip())
    except (ValueError, ScpiError) as exc:
        raise ProtocolError("bad error reply %r" % text) from exc


def _format_arg(spec, value):
    kind = spec[0]
    if kind == C.A_FLOAT:
        return repr(float(value))
    if kind == C.A_PRESSURE:
        return "%r PA" % float(value)
    if kind in (C.A_INT, C.A_CHANNEL):
        if isinstance(value, bool) or int(value) != value:
            raise ValueError("expected an integer, got %r" % (value,))
        return "%d" % value
    if kind == C.A_BOOL:
        return "ON" if value else "OFF"
    if kind == C.A_ENUM:
        return str(value).upper()
    if kind == C.A_STRING:
        return quote(str(value))
    raise ValueError("bad argument kind %r" % kind)


def _chanlist(ch):
    chans = [ch] if isinstance(ch, int) else list(ch)
    return chans, "(@%s)" % ",".join("%d" % c for c in chans)


def _enum_choices(rec):
    for spec in rec[C.ARGS]:
        if spec[0] == C.A_ENUM:
            return spec[1]
    return None


def _parse_value(rec, kind, text, unit):
    text = text.strip()
    if kind == C.R_INT:
        return int(text)
    if kind == C.R_FLOAT:
        return None if text == "NAN" else float(text)
    if kind == C.R_PRESSURE:
        return None if text == "NAN" else units.to_pa(float(text), unit)
    if kind == C.R_BOOL:
        if text not in ("0", "1"):
            raise ValueError("not a boolean: %r" % text)
        return text == "1"
    if kind == C.R_WORD:
        choices = _enum_choices(rec)
        if choices is None:
            return None if text == "NONE" else text.lower()
        for choice in choices:
            if text == C.short_form(choice) or text == choice.upper():
                return choice.upper()
        raise ValueError("unknown word %r" % text)
    if kind == C.R_STRING:
        return unquote(text)
    raise ValueError("bad reply kind %r" % kind)


class Client:
    """Remote facade of one controller over a tcgauge.link.Link."""

    def __init__(self, link, channels=2):
        self.link = link
        self.channels = channels

    def open(self):
        """Start a session: clear the device's error queue and event register."""
        self.cls()
        return self

    # ---- the one round trip every generated method uses -------------------------
    def _call(self, text, n_replies, check=True):
        line = text + (";" + _ERROR_QUERY if check else "")
        reply = self.link.query(line)
        try:
            parts = split_top(reply, ";")
        except ScpiError as exc:
            raise ProtocolError("malformed reply %r to %r" % (reply, text)) from exc
        if check:
            code, message = parse_error(parts.pop())
            if code != 0:
                raise DeviceError(code, message, self._drain())
        if len(parts) != n_replies:
            raise ProtocolError("expected %d reply unit(s) to %r, got %r" % (n_replies, text, reply))
        return parts

    def _drain(self):
        more = []
        for _ in range(C.ERROR_QUEUE_LEN + 1):
            code, message = parse_error(self.link.query(_ERROR_QUERY))
            if code == 0:
                break
            more.append((code, message))
        return more

    def _invoke(self, rec, query, suffix, ch, values):
        specs = rec[C.QARGS] if query else rec[C.ARGS]
        texts = []
        chans = None
        vals = list(values)
        for spec in specs:
            if spec[0] == C.A_CHANLIST:
                if ch is None:
                    if spec[1]:
                        raise ValueError("this command needs a channel")
                    continue
                chans, chan_text = _chanlist(ch)
                texts.append(chan_text)
            else:
                if not vals:
                    raise TypeError("missing argument for %s" % rec[C.HEADER])
                texts.append(_format_arg(spec, vals.pop(0)))
        if vals:
            raise TypeError("too many arguments for %s" % rec[C.HEADER])
        text = header_text(rec, suffix) + ("?" if query else "")
        if texts:
            text += " " + ",".join(texts)
        if not query:
            self._call(text, 0)
            return None
        kind = rec[C.REPLY]
        want_unit = kind == C.R_PRESSURE
        if want_unit:
            text += ";:CONF:UNIT?"
        parts = self._call(text, 2 if want_unit else 1, check=rec[C.GETTER] not in _NO_CHECK)
        unit = parts[1].strip() if want_unit else None
        body = parts[0]
        try:
            return self._parse(rec, kind, body, unit, chans, ch)
        except (ValueError, ScpiError, IndexError) as exc:
            raise ProtocolError("bad reply %r to %r: %s" % (body, text, exc)) from exc

    def _parse(self, rec, kind, body, unit, chans, ch):
        if kind == C.R_TEXT:
            if rec[C.GETTER] == "_idn":
                fields = tuple(body.split(","))
                if len(fields) != 4:
                    raise ValueError("*IDN? needs 4 fields")
                return fields
            if rec[C.GETTER] == "_error":
                return parse_error(body)
            return body
        items = split_top(body, ",")
        if kind == C.R_STRINGS:
            return [unquote(t.strip()) for t in items] if body.strip() else []
        per = 4 if kind == C.R_READING else 1
        if len(items) % per:
            raise ValueError("reply has %d fields" % len(items))
        count = len(items) // per
        if chans is not None and count != len(chans):
            raise ValueError("%d values for %d channels" % (count, len(chans)))
        if chans is None:
            chans = list(range(1, count + 1)) if C.channel_arg(rec[C.QARGS]) >= 0 else [None]
        out = []
        for i in range(count):
            f = items[i * per : (i + 1) * per]
            if kind == C.R_READING:
                value, r_unit, state, fault = [x.strip() for x in f]
                out.append(Reading(chans[i], None if value == "NAN" else float(value), r_unit,
                                   state.lower(), None if fault == "NONE" else fault.lower()))
            else:
                out.append(_parse_value(rec, kind, f[0], unit))
        if isinstance(ch, int) or C.channel_arg(rec[C.QARGS]) < 0:
            if len(out) != 1:
                raise ValueError("expected one value")
            return out[0]
        return out


def _client_name(method):
    return method[1:] if method.startswith("_") else method


def _make(rec, query):
    has_suffix = "#" in rec[C.HEADER]
    specs = rec[C.QARGS] if query else rec[C.ARGS]
    has_chan = C.channel_arg(specs) >= 0
    optional_chan = has_chan and not specs[C.channel_arg(specs)][1]

    def method(self, *args, **kw):
        args = list(args)
        suffix = None
        ch = None
        if has_suffix:
            suffix = kw.pop("n", None) if not args else args.pop(0)
            if suffix is None:
                raise TypeError("missing setpoint number")
        if has_chan:
            if "ch" in kw:
                ch = kw.pop("ch")
            elif args:
                ch = args.pop(0)
            if ch is None and not optional_chan:
                raise TypeError("missing channel")
        if kw:
            raise TypeError("unexpected keyword(s) %s" % ", ".join(sorted(kw)))
        return self._invoke(rec, query, suffix, ch, args)

    sig = []
    if has_suffix:
        sig.append("n")
    if has_chan:
        sig.append("ch=None" if optional_chan else "ch")
    for spec in specs:
        if spec[0] != C.A_CHANLIST:
            sig.append("%s:%s" % (spec[0], ",".join(str(x) for x in spec[1:]) if len(spec) > 1 else ""))
    form = rec[C.HEADER] + ("?" if query else "")
    method.__name__ = _client_name(rec[C.GETTER] if query else rec[C.SETTER])
    method.__doc__ = "%s  [%s]\n\nArguments: (%s)." % (rec[C.HELP], form, ", ".join(sig))
    return method


def _generate():
    for rec in C.COMMANDS:
        for query, name in ((False, rec[C.SETTER]), (True, rec[C.GETTER])):
            if name is None:
                continue
            attr = _client_name(name)
            if hasattr(Client, attr):
                raise RuntimeError("client method %s defined twice" % attr)
            setattr(Client, attr, _make(rec, query))


_generate()
