"""Table files: a `Table` as UTF-8 JSON text with a CRC-32, format "tcgauge-table" versions 1 and 2.

Layout, exactly as `dumps` writes it (one key order, one spacing, numbers
as '%.10g', so CPython and MicroPython write the same bytes)::

    {"format": "tcgauge-table", "version": 1,
     "gas": "N2", "profile": "wren-demo", "tc_type": "K", "heater_ma": 165, "ref_c": 0,
     "invalid_margin": 0.15, "noise_mv": 0.05,
     "source": "invented demo data",
     "points": [
      [12, 0.05],
      ...
      [0.82, 400]
     ],
     "crc32": "0x1a2b3c4d"}

followed by one newline. Points are [EMF mV, pressure Pa] by rising
pressure.

Version 2 adds the wall model (gaugecore.coldjunction.RiseReferral): a line
' "wall_c": 22,' (the wall temperature the table was made at) after
"source", and, optionally, after the points::

     ],
     "rise_slope_per_k": [
      -0.00182, -0.00181, ... (8 a line, one per point, in point order)
     ],
     "crc32": ...

`dumps` writes version 1, byte for byte as before, for a table without a
wall temperature, and version 2 only when there is one; so old readers keep
reading every table that does not need the new fields, and every version-1
file loads as it did (the channel then assumes a wall temperature and says
so). Strings are written with '"', '\\' and control characters
escaped ('\\"', '\\\\', '\\u00XX'), anything else as it is, in UTF-8.

Canonical encoding and CRC: the file is BODY + TAIL, where TAIL is
'"crc32": "0x" + 8 lowercase hex digits + '"}' + newline and BODY is every
byte before it. The CRC-32 (IEEE 802.3, gaugecore.crc32) is taken over the
UTF-8 bytes of BODY as they stand in the file. The reader checks those bytes
directly and never re-formats numbers, so the check cannot depend on how an
interpreter prints or parses floats; and since the CRC covers every byte of
the body and the tail must be exact, any single changed byte is caught
(a CRC-32 detects every error burst of 32 bits or fewer). A hand-edited file
therefore fails its check: edit tables with the tools, which re-write it.

Numbers are stored to 10 significant digits ('%.10g'); `loads` returns the
table with those values.
"""

import json
import os

from gaugecore.crc32 import crc32
from gaugecore.table import Table, TableError

FORMAT = "tcgauge-table"
VERSION = 2  # the newest version written; versions 1 and 2 are read
_SLOPES_PER_LINE = 8

_CRC_KEY = '"crc32": "'
# Fields of version 1 in file order (after format and version, before crc32).
_META = ("gas", "profile", "tc_type", "heater_ma", "ref_c", "invalid_margin", "noise_mv", "source")
_STRINGS = ("gas", "profile", "tc_type", "source")
_ALL = ("format", "version") + _META + ("points", "crc32")
_ALL_V2 = _ALL + ("wall_c", "rise_slope_per_k")


class TableFileError(ValueError):
    """A table file cannot be read: the message names the field or the check that failed."""


def _num(x):
    return "%.10g" % x


def _quote(s):
    out = ['"']
    for ch in s:
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ord(ch) < 0x20:
            out.append("\\u%04x" % ord(ch))
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _body(table):
    wall_c = getattr(table, "wall_c", None)
    lines = [
        '{"format": %s, "version": %d,' % (_quote(FORMAT), 1 if wall_c is None else 2),
        ' "gas": %s, "profile": %s, "tc_type": %s, "heater_ma": %s, "ref_c": %s,'
        % (_quote(table.gas), _quote(table.profile), _quote(table.tc_type),
           _num(table.heater_ma), _num(table.ref_c)),
        ' "invalid_margin": %s, "noise_mv": %s,' % (_num(table.invalid_margin), _num(table.noise_mv)),
        ' "source": %s,' % _quote(table.source),
    ]
    if wall_c is not None:
        lines.append(' "wall_c": %s,' % _num(wall_c))
    lines.append(' "points": [')
    pts = table.points
    last = len(pts) - 1
    for i in range(len(pts)):
        lines.append("  [%s, %s]%s" % (_num(pts[i][0]), _num(pts[i][1]), "," if i < last else ""))
    lines.append(" ],")
    k = getattr(table, "rise_slope_per_k", None)
    if k is not None:
        lines.append(' "rise_slope_per_k": [')
        n = len(k)
        for i in range(0, n, _SLOPES_PER_LINE):
            row = [_num(k[j]) for j in range(i, min(i + _SLOPES_PER_LINE, n))]
            lines.append("  " + ", ".join(row) + ("," if i + _SLOPES_PER_LINE < n else ""))
        lines.append(" ],")
    lines.append(" ")
    return "\n".join(lines)


def _tail(crc):
    return '%s0x%08x"}\n' % (_CRC_KEY, crc)


def dumps(table):
    """The table as file text (str), CRC included."""
    body = _body(table)
    return body + _tail(crc32(body.encode("utf-8")))


def _show(value):
    if isinstance(value, float):
        return "%.6g" % value
    return repr(value)


def _is_num(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _no_constant(name):
    raise ValueError("JSON has no %s" % name)


def _json_loads(text):
    """json.loads that refuses NaN and Infinity, as MicroPython's json does."""
    try:
        return json.loads(text, parse_constant=_no_constant)
    except TypeError:  # MicroPython: no keyword arguments (and no NaN/Infinity anyway)
        return json.loads(text)


def parse(text):
    """File text (str or bytes) -> (Table, crc32 int). Raises TableFileError."""
    if isinstance(text, (bytes, bytearray)):
        try:
            text = text.decode("utf-8")
        except ValueError:
            raise TableFileError("not UTF-8 text")
    try:
        doc = _json_loads(text)
    except ValueError:
        raise TableFileError("not valid JSON (truncated or damaged file?)")
    if not isinstance(doc, dict):
        raise TableFileError("not a table file: expected a JSON object")
    if doc.get("format") != FORMAT:
        raise TableFileError("field 'format': expected %s, got %s"
                             % (_show(FORMAT), _show(doc.get("format"))))
    version = doc.get("version")
    if not _is_num(version) or version not in (1, 2) or isinstance(version, float):
        raise TableFileError("unsupported table file version %s (this build reads versions 1 and %d)"
                             % (_show(version), VERSION))
    crc_text = doc.get("crc32")
    if crc_text is None:
        raise TableFileError("field 'crc32' is missing")
    if (not isinstance(crc_text, str) or len(crc_text) != 10 or crc_text[:2] != "0x"
            or not all(c in "0123456789abcdef" for c in crc_text[2:])):
        raise TableFileError("field 'crc32': expected '0x' and 8 lowercase hex digits, got %s"
                             % _show(crc_text))
    file_crc = int(crc_text[2:], 16)
    cut = text.rfind(_CRC_KEY)
    if text[cut:] != _tail(file_crc):
        raise TableFileError("field 'crc32' must close the file as %s (file edited by hand?)"
                             % _show(_tail(file_crc)))
    content_crc = crc32(text[:cut].encode("utf-8"))
    if content_crc != file_crc:
        raise TableFileError("crc mismatch: file says 0x%08x, content gives 0x%08x"
                             % (file_crc, content_crc))
    known = _ALL if version == 1 else _ALL_V2
    # the first unknown key by name: dict order differs between interpreters
    unknown = sorted([key for key in doc if key not in known])
    if unknown:
        raise TableFileError("field %s: not a field of version %d" % (_show(unknown[0]), version))
    meta = {}
    for key in _META:
        if key not in doc:
            raise TableFileError("field '%s' is missing" % key)
        v = doc[key]
        if key in _STRINGS:
            if not isinstance(v, str):
                raise TableFileError("field '%s': expected a string, got %s" % (key, _show(v)))
        elif not _is_num(v):
            raise TableFileError("field '%s': expected a number, got %s" % (key, _show(v)))
        meta[key] = v
    pts = doc.get("points")
    if pts is None:
        raise TableFileError("field 'points' is missing")
    if not isinstance(pts, list):
        raise TableFileError("field 'points': expected a list of [EMF mV, pressure Pa] pairs")
    for i in range(len(pts)):
        pt = pts[i]
        if not isinstance(pt, list) or len(pt) != 2:
            raise TableFileError("field 'points[%d]': expected a pair [EMF mV, pressure Pa], got %s"
                                 % (i, _show(pt)))
        for j in (0, 1):
            if not _is_num(pt[j]):
                raise TableFileError("field 'points[%d][%d]': expected a number, got %s"
                                     % (i, j, _show(pt[j])))
    wall_c = None
    slopes = None
    if version == 2:
        if "wall_c" not in doc:
            raise TableFileError("field 'wall_c' is missing (version 2 carries the wall temperature)")
        wall_c = doc["wall_c"]
        if not _is_num(wall_c):
            raise TableFileError("field 'wall_c': expected a number, got %s" % _show(wall_c))
        slopes = doc.get("rise_slope_per_k")
        if slopes is not None:
            if not isinstance(slopes, list):
                raise TableFileError("field 'rise_slope_per_k': expected a list of numbers")
            for i in range(len(slopes)):
                if not _is_num(slopes[i]):
                    raise TableFileError("field 'rise_slope_per_k[%d]': expected a number, got %s"
                                         % (i, _show(slopes[i])))
    try:
        table = Table(pts, meta["gas"], meta["profile"], meta["heater_ma"], meta["ref_c"],
                      meta["tc_type"], meta["source"], meta["invalid_margin"], meta["noise_mv"],
                      wall_c, slopes)
    except TableError as exc:
        raise TableFileError(str(exc))
    table.file_crc32 = file_crc
    return table, file_crc


def loads(text):
    """File text (str or bytes) -> Table. Raises TableFileError."""
    return parse(text)[0]


def load(path):
    """Read the table file at `path`. Raises TableFileError, or OSError if it cannot be read."""
    with open(path, "rb") as f:
        data = f.read()
    return loads(data)


def save(path, table):
    """Write `table` to `path` atomically: write path + '.tmp', read it back and
    check it, then rename over `path`. A file that fails the check is removed and
    `path` is left as it was (TableFileError or OSError)."""
    data = dumps(table).encode("utf-8")
    tmp = path + ".tmp"
    try:
        with open(tmp, "wb") as f:
            f.write(data)
            if hasattr(f, "flush"):
                f.flush()
            if hasattr(os, "fsync") and hasattr(f, "fileno"):
                os.fsync(f.fileno())
        with open(tmp, "rb") as f:
            back = f.read()
        if back != data:
            raise TableFileError("read-back of %s differs from what was written" % tmp)
        parse(back)
    except Exception:
        try:
            os.remove(tmp)
        except OSError:
            pass
        raise
    getattr(os, "replace", os.rename)(tmp, path)
