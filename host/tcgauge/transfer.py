"""Tables onto the device and back over the protocol (the TABLe commands).

- `push(client, path_or_table, channel=None, name=None, progress=None)` sends
  a table file in chunks (gaugecore.tablexfer: base64, CRC-16 and index per
  chunk), retries a refused chunk once, ends the upload and reports success
  only after reading the CRC-32 back (`TABL:CRC?`, and `TABL:ACT?` for the
  channel) and finding the file's own. Returns a `PushResult`.
- `pull(client, name) -> str`: the file's exact text, chunk by chunk, each
  chunk's CRC-16 checked, the whole against `TABL:CRC?` and tablefile.parse.
- `listing(client) -> Listing`: catalogue names with their CRCs and which
  table each channel converts with.

Chunks are pipelined: the next chunk goes out while the device answers the
one before (`WINDOW` lines in flight), so the link's two directions overlap.
Each chunk line carries `;:SYST:ERR?`; when one comes back refused, the
chunks after it are refused by the device as out of order, their replies
are read and the upload resumes at the refused chunk. Records of a streaming
device are set aside by the Link, so all of this works while it streams.

Errors: `TransferError` (a TcgaugeError) with the device's reason; the
upload is aborted on the device first, so nothing is left half done.
"""

import logging
import os
import zlib

from gaugecore import record, tablefile, tablexfer
from gaugecore.crc32 import crc32
from gaugecore.scpi import quote, split_top
from tcgauge.client import DeviceError, parse_error
from tcgauge.errors import TcgaugeError

log = logging.getLogger(__name__)

WINDOW = 2  # chunk lines in flight
RETRIES = 1  # times a refused chunk is sent again
_NAME_CHARS = "abcdefghijklmnopqrstuvwxyz0123456789_-"


class TransferError(TcgaugeError):
    """A table transfer failed; the message gives the device's or our reason."""


class PushResult:
    """What `push` did: name, channel (0: catalogue only), bytes, chunks, CRC-32, retries."""

    def __init__(self, name, channel, nbytes, chunks, crc32, retries):
        self.name = name
        self.channel = channel
        self.nbytes = nbytes
        self.chunks = chunks
        self.crc32 = crc32
        self.retries = retries

    def __repr__(self):
        return "PushResult(%r, channel=%d, %d bytes, %d chunks, crc32=0x%08x, retries=%d)" % (
            self.name, self.channel, self.nbytes, self.chunks, self.crc32, self.retries)


class Listing:
    """Tables on the device: `tables` [(name, crc32)], `channels` [(ch, name, crc32)]."""

    def __init__(self, tables, channels):
        self.tables = tables
        self.channels = channels

    def lines(self):
        """Plain-text lines for the command line."""
        out = ["tables on the device:"]
        for name, crc in self.tables:
            users = [str(ch) for ch, n, _ in self.channels if n == name]
            out.append("  %-24s crc32 0x%08x%s" % (name, crc, ("  channel " + ",".join(users)) if users else ""))
        out.append("channels:")
        for ch, name, crc in self.channels:
            note = ""
            cat = dict(self.tables).get(name)
            if cat is not None and cat != crc:
                note = "  (installed copy differs from the catalogue file: select it again)"
            out.append("  %d  %-24s crc32 0x%08x%s" % (ch, name, crc, note))
        return out


def file_crc32(data):
    """The CRC-32 a table file states for itself (over the bytes before its crc32 field)."""
    return tablefile.parse(data)[1]


def _file_bytes(path_or_table):
    """(bytes, default name) of a table file path, a Table, or file bytes/text."""
    if isinstance(path_or_table, (bytes, bytearray)):
        return bytes(path_or_table), None
    if isinstance(path_or_table, str) and path_or_table.lstrip().startswith("{"):
        return path_or_table.encode("utf-8"), None
    if isinstance(path_or_table, (str, os.PathLike)):
        path = os.fspath(path_or_table)
        try:
            with open(path, "rb") as f:
                data = f.read()
        except OSError as exc:
            raise TransferError("%s: cannot read: %s" % (path, exc.strerror or exc))
        return data, os.path.splitext(os.path.basename(path))[0]
    return tablefile.dumps(path_or_table).encode("utf-8"), None


def device_name(stem):
    """A file stem as a device table name: lower case, other characters as '_', at most 24."""
    out = "".join(c if c in _NAME_CHARS else "_" for c in stem.lower())
    return out[:24] or "table"


def call(client, text, n_replies=1):
    """One round trip like Client's methods (`;:SYST:ERR?` appended, DeviceError on an
    error) -> list of the reply units, without the Link's poll before writing, which
    waits a whole port read timeout when nothing is waiting (tcgauge.link.Link.poll)."""
    from gaugecore.scpi import ScpiError, split_top
    from tcgauge.client import ProtocolError

    link = client.link
    if getattr(link.port, "in_waiting", 0):
        link.poll()
    link.write_line(text + ";:SYST:ERR?")
    reply = link.read_reply()
    try:
        parts = split_top(reply, ";")
    except ScpiError as exc:
        raise ProtocolError("malformed reply %r to %r" % (reply, text)) from exc
    code, message = parse_error(parts.pop())
    if code != 0:
        raise DeviceError(code, message)
    if len(parts) != n_replies:
        raise ProtocolError("expected %d reply unit(s) to %r, got %r" % (n_replies, text, reply))
    return parts


def _string(text):
    from gaugecore.scpi import unquote

    return unquote(text.strip())


def _reason(message):
    """The device's own reason from an error message ('Illegal parameter value;why' -> 'why')."""
    head, sep, tail = message.partition(";")
    return tail if sep else head


def _stated_crc32(data):
    """The CRC-32 over the bytes before a file's crc32 field, without parsing it."""
    cut = data.rfind(b'"crc32": "')
    if cut < 0:
        raise TransferError("not a table file: no crc32 field")
    return crc32(data[:cut])


def _unquote_crc(text):
    return tablexfer.parse_crc32(text)


def _chunks(data):
    size = tablexfer.UPLOAD_CHUNK
    out = []
    for k in range(0, len(data), size):
        part = data[k:k + size]
        out.append("TABL:UPL:DATA %d,'%s',%d" % (k // size, tablexfer.b64encode(part), record.crc16(part)))
    return out


def _abort(client):
    try:
        call(client, "TABL:UPL:ABOR", 0)
    except TcgaugeError as exc:  # best effort: the device drops it at the next BEGin anyway
        log.warning("could not abort the upload: %s", exc)


def push(client, path_or_table, channel=None, name=None, progress=None, mangle=None,
         verify_locally=True):
    """Send a table to the device and install it (see the module docstring) -> PushResult.

    channel: 1..N to switch that channel to the table, None for the
    catalogue only. name: device table name (default: the file's stem).
    progress(sent_bytes, total_bytes) after each acknowledged chunk.
    mangle(index, line) -> line: a hook for tests to damage chunk lines.
    verify_locally: check the file here first (tablefile.parse), so a table the
    device would refuse never goes out; False leaves every check to the device.
    """
    data, stem = _file_bytes(path_or_table)
    if verify_locally:
        try:
            crc = file_crc32(data)
        except tablefile.TableFileError as exc:
            raise TransferError("not a valid table file: %s" % exc)
    else:
        crc = _stated_crc32(data)
    if name is None:
        if stem is None:
            t = tablefile.loads(data)
            stem = "%s_%s" % (t.profile, t.gas)
        name = device_name(stem)
    ch = 0 if channel is None else int(channel)
    lines = _chunks(data)
    link = client.link
    try:
        call(client, "TABL:UPL:BEG %s,%d,%d,'0x%08x'" % (quote(name), ch, len(data), zlib.crc32(data)), 0)
    except DeviceError as exc:
        raise TransferError("device refused the upload of %s: %s" % (name, _reason(exc.message)))
    refused = [0] * len(lines)  # times each chunk was refused for its own sake
    retries = 0
    acked = 0  # chunks the device has taken (the index it expects next)
    i = 0
    inflight = []
    ended = False
    try:
        while acked < len(lines):
            while i < len(lines) and len(inflight) < WINDOW:
                line = lines[i] if mangle is None else mangle(i, lines[i])
                link.write_line(line + ";:SYST:ERR?")
                inflight.append(i)
                i += 1
            j = inflight.pop(0)
            code, message = parse_error(link.read_reply())
            if code == 0:
                acked = j + 1
                if progress is not None:
                    progress(min(acked * tablexfer.UPLOAD_CHUNK, len(data)), len(data))
                continue
            for _ in inflight:  # refused as out of order after j: read their replies
                link.read_reply()
            inflight = []
            nxt = int(call(client, "TABL:UPL:NEXT?")[0])  # where the device stands decides
            if nxt < 0:
                raise TransferError("device dropped the upload of %s: %s" % (name, _reason(message)))
            if nxt <= j:
                refused[nxt] += 1
                if refused[nxt] > RETRIES:
                    raise TransferError("chunk %d refused twice: %s" % (nxt, _reason(message)))
                log.info("chunk %d refused (%s); sending it again", nxt, message)
                retries += 1
            else:
                log.warning("device error during chunk %d (chunk taken): %s", j, message)
            i = acked = nxt
        ended = True  # END closes the upload on the device, whatever its outcome
        try:
            got = _unquote_crc(_string(call(client, "TABL:UPL:END?")[0]))
        except DeviceError as exc:
            raise TransferError("device refused table %s: %s" % (name, _reason(exc.message)))
    except BaseException:
        if not ended:
            _abort(client)
        raise
    if got != crc:
        raise TransferError("device installed crc32 0x%08x, the file has 0x%08x" % (got, crc))
    back = _unquote_crc(_string(call(client, "TABL:CRC? %s" % quote(name))[0]))
    if back != crc:
        raise TransferError("read-back of %s gives crc32 0x%08x, the file has 0x%08x" % (name, back, crc))
    if ch:
        active = _unquote_crc(_string(call(client, "TABL:ACT? (@%d)" % ch)[0]))
        if active != crc:
            raise TransferError("channel %d converts with crc32 0x%08x, the file has 0x%08x"
                                % (ch, active, crc))
    return PushResult(name, ch, len(data), len(lines), crc, retries)


def pull(client, name):
    """The exact text of catalogue table `name` (str), checked chunk by chunk and as a whole."""
    want = _unquote_crc(_string(call(client, "TABL:CRC? %s" % quote(name))[0]))
    parts = []
    k = 0
    while True:
        reply = call(client, "TABL:DOWN? %s,%d" % (quote(name), k))[0]
        items = split_top(reply, ",")
        if len(items) != 2:
            raise TransferError("chunk %d of %s: bad reply %r" % (k, name, reply))
        crc_text, text = [_string(x) for x in items]
        try:
            part = tablexfer.b64decode(text)
        except ValueError:
            raise TransferError("chunk %d of %s is not base64" % (k, name))
        if record.crc16(part) != int(crc_text):
            raise TransferError("chunk %d of %s: crc16 mismatch" % (k, name))
        if not part:
            break
        parts.append(part)
        k += 1
    data = b"".join(parts)
    try:
        got = file_crc32(data)
    except tablefile.TableFileError as exc:
        raise TransferError("pulled %s is not a valid table file: %s" % (name, exc))
    if got != want:
        raise TransferError("pulled %s has crc32 0x%08x, the device says 0x%08x" % (name, got, want))
    return data.decode("utf-8")


def listing(client):
    """Catalogue tables with their CRC-32 and the table of every channel -> Listing."""
    names = client.tables()
    tables = [(n, _unquote_crc(client.table_crc(n))) for n in names]
    chans = client.table(None)
    crcs = client.active_crc(None)
    return Listing(tables, [(i + 1, chans[i], _unquote_crc(crcs[i])) for i in range(len(chans))])


__all__ = ["push", "pull", "listing", "PushResult", "Listing", "TransferError", "device_name"]
