"""Table transfer over the protocol: chunk coding and the state of one upload.

A table file crosses the 256-byte line of the protocol in chunks:

    chunk text  base64 (RFC 4648 section 4, with '=' padding) of up to
                UPLOAD_CHUNK bytes (216 characters), so a whole command line
                with its error query stays under 256 bytes
    chunk CRC   CRC-16/IBM-3740 (gaugecore.record.crc16) of the chunk's bytes
    index       0, 1, 2, ... in order; a lost chunk shows as a gap, a repeated
                one as an index already taken
    whole file  its length and CRC-32 (gaugecore.crc32, as in table files) are
                announced when the upload begins and checked when it ends

`Upload` collects the chunks of one upload in RAM (at most the store's
byte limit, 16 kB) and refuses, with our own message, a chunk out of order,
one whose CRC does not match, text that is not base64 and bytes beyond the
announced length; a refused chunk changes nothing, so the host may send it
again. `finish()` checks length and CRC-32 and returns the bytes; the store
(gaugecore.store) then checks the table itself and installs it.

The base64 text is checked character by character before it is decoded,
because decoders differ in what they skip (CPython's binascii ignores
characters outside the alphabet); the messages are the same on every
interpreter. `chunk_of(data, index)` is the device's side of a download.
"""

from gaugecore.compat import const
from gaugecore.crc32 import crc32
from gaugecore.record import crc16

UPLOAD_CHUNK = const(162)  # bytes per upload chunk: 216 base64 characters
UPLOAD_TEXT = const(216)  # longest chunk text accepted
DOWNLOAD_CHUNK = const(192)  # bytes per download chunk (256 characters; replies have no line limit)
MAX_CHUNKS = const(9999)

_ALPHABET = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/"
_HEX = "0123456789abcdef"


def _b64_value(c):
    i = _ALPHABET.find(c)
    if i < 0:
        raise ValueError("not base64")
    return i


def b64decode(text):
    """Strict base64 -> bytes; ValueError('not base64') on anything else."""
    n = len(text)
    if n % 4:
        raise ValueError("not base64")
    out = bytearray()
    i = 0
    while i < n:
        a = _b64_value(text[i])
        b = _b64_value(text[i + 1])
        c3 = text[i + 2]
        c4 = text[i + 3]
        last = i + 4 == n
        if c3 == "=":
            if c4 != "=" or not last or b & 15:
                raise ValueError("not base64")
            out.append((a << 2) | (b >> 4))
        elif c4 == "=":
            if not last:
                raise ValueError("not base64")
            c = _b64_value(c3)
            if c & 3:
                raise ValueError("not base64")
            out.append((a << 2) | (b >> 4))
            out.append(((b & 15) << 4) | (c >> 2))
        else:
            c = _b64_value(c3)
            d = _b64_value(c4)
            out.append((a << 2) | (b >> 4))
            out.append(((b & 15) << 4) | (c >> 2))
            out.append(((c & 3) << 6) | d)
        i += 4
    return bytes(out)


def b64encode(data):
    """bytes -> base64 text with '=' padding (str)."""
    out = []
    n = len(data)
    i = 0
    a = _ALPHABET
    while i + 2 < n:
        v = (data[i] << 16) | (data[i + 1] << 8) | data[i + 2]
        out.append(a[v >> 18] + a[(v >> 12) & 63] + a[(v >> 6) & 63] + a[v & 63])
        i += 3
    rest = n - i
    if rest == 1:
        v = data[i] << 16
        out.append(a[v >> 18] + a[(v >> 12) & 63] + "==")
    elif rest == 2:
        v = (data[i] << 16) | (data[i + 1] << 8)
        out.append(a[v >> 18] + a[(v >> 12) & 63] + a[(v >> 6) & 63] + "=")
    return "".join(out)


def parse_crc32(text):
    """'0x1a2b3c4d' or '1A2B3C4D' -> int; ValueError with our message otherwise."""
    t = text.lower()
    if t.startswith("0x"):
        t = t[2:]
    if len(t) != 8:
        raise ValueError("crc32 must be 8 hex digits, got %s" % text[:12])
    for c in t:
        if _HEX.find(c) < 0:
            raise ValueError("crc32 must be 8 hex digits, got %s" % text[:12])
    return int(t, 16)


def crc32_text(crc):
    """A CRC-32 as the protocol writes it: '0x' and 8 lower-case hex digits."""
    return "0x%08x" % crc


def chunk_of(data, index, size=DOWNLOAD_CHUNK):
    """(crc16, base64 text) of chunk `index` of `data`; past the end: (0xFFFF, '')."""
    part = data[index * size:(index + 1) * size]
    return crc16(part), b64encode(part)


class Upload:
    """One upload in progress (see the module docstring).

    name: table name; channel: 1..N to switch that channel when it ends, 0
    for the catalogue only; total: announced bytes; crc: announced CRC-32.
    """

    def __init__(self, name, channel, total, crc):
        self.name = name
        self.channel = channel
        self.total = total
        self.crc = crc
        self.next_index = 0
        self._buf = bytearray()

    @property
    def received(self):
        """Bytes received so far."""
        return len(self._buf)

    def add(self, index, text, chunk_crc):
        """Take chunk `index`; ValueError (nothing taken) if it is refused."""
        if index != self.next_index:
            if index < self.next_index:
                raise ValueError("chunk %d repeated: expected %d" % (index, self.next_index))
            raise ValueError("chunk %d out of order: expected %d" % (index, self.next_index))
        data = b64decode(text) if text else b""
        if not data:
            raise ValueError("chunk %d is empty" % index)
        got = crc16(data)
        if got != chunk_crc:
            raise ValueError("chunk %d: crc16 is 0x%04x, not 0x%04x" % (index, got, chunk_crc))
        if len(self._buf) + len(data) > self.total:
            raise ValueError("chunk %d: more than the %d bytes announced" % (index, self.total))
        self._buf.extend(data)
        self.next_index += 1

    def finish(self):
        """The file's bytes once length and CRC-32 agree; ValueError otherwise."""
        n = len(self._buf)
        if n != self.total:
            raise ValueError("upload incomplete: %d of %d bytes" % (n, self.total))
        data = bytes(self._buf)
        got = crc32(data)
        if got != self.crc:
            raise ValueError("crc32 is 0x%08x, not the 0x%08x announced" % (got, self.crc))
        return data
