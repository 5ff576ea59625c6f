"""Uncertainty band of a derived gas table, and its sidecar file.

A `Band` holds, for each point of a derived table, the EMF, the table's
pressure and a lower and upper pressure: the range of pressures the
derivation allows at that EMF. It lives beside the table in a sidecar JSON
file (`he.json` -> `he.band.json`, see `band_path`), because the table file
format (gaugecore.tablefile, version 1) has no field for it and is not to
be changed for this. The sidecar names the CRC-32 of the table it belongs
to, so a band is never applied to another table.

Sidecar layout (format "tcgauge-band", version 1)::

    {"format": "tcgauge-band", "version": 1, "table_crc32": "0x1a2b3c4d",
     "gas": "He", "profile": "wren-demo", "method": "...",
     "info": {...how the band was made...},
     "points": [[emf_mv, pressure_pa, lower_pa, upper_pa], ...]}
"""

import json
import os

import numpy as np

from tcgauge.errors import TcgaugeError

FORMAT = "tcgauge-band"
VERSION = 1


class BandError(TcgaugeError):
    """A band sidecar cannot be read or does not belong to its table."""


def band_path(table_path):
    """Sidecar path for a table file: 'x.json' -> 'x.band.json', else 'x' + '.band.json'."""
    root = table_path[:-5] if table_path.endswith(".json") else table_path
    return root + ".band.json"


class Band:
    """Lower and upper pressure per derived-table point (pressures in Pa, by rising pressure)."""

    def __init__(self, gas, profile, points, method="", info=None, table_crc32=None):
        pts = np.asarray(points, dtype=float)
        if pts.ndim != 2 or pts.shape[1] != 4 or len(pts) < 2:
            raise BandError("band points must be [EMF mV, pressure, lower, upper] rows, at least 2")
        if not np.all(np.isfinite(pts)) or np.any(pts[:, 1:] <= 0.0):
            raise BandError("band pressures must be finite and positive")
        if np.any(pts[:, 2] > pts[:, 1]) or np.any(pts[:, 3] < pts[:, 1]):
            raise BandError("band lower/upper pressures must enclose the table pressure")
        if np.any(np.diff(pts[:, 0]) >= 0.0):
            raise BandError("band EMFs must fall strictly as pressure rises")
        self.gas = gas
        self.profile = profile
        self.points = pts
        self.method = method
        self.info = dict(info or {})
        self.table_crc32 = table_crc32

    @property
    def emf_mv(self):
        return self.points[:, 0]

    @property
    def pressure_pa(self):
        return self.points[:, 1]

    @property
    def lower_pa(self):
        return self.points[:, 2]

    @property
    def upper_pa(self):
        return self.points[:, 3]

    def relative(self):
        """(down, up) per point: 1 - lower/p and upper/p - 1."""
        return 1.0 - self.lower_pa / self.pressure_pa, self.upper_pa / self.pressure_pa - 1.0

    def limits_pa(self, emf_mv):
        """(lower_pa, upper_pa) at EMF values (array), log pressure linear in EMF between points.

        Outside the table's EMF span the end values are held.
        """
        e = np.asarray(emf_mv, dtype=float)
        x = self.emf_mv[::-1]
        lo = np.interp(e, x, np.log(self.lower_pa[::-1]))
        hi = np.interp(e, x, np.log(self.upper_pa[::-1]))
        return np.exp(lo), np.exp(hi)

    def summary(self):
        """One line: the narrowest and the widest band (half-width (upper - lower) / 2p)."""
        down, up = self.relative()
        w = 0.5 * (down + up)
        k = int(np.argmax(w))
        return ("band (%s): -%.1f %% / +%.1f %% at the narrowest, up to -%.1f %% / +%.1f %% at %.4g Pa"
                % (self.gas, 100 * down[int(np.argmin(w))], 100 * up[int(np.argmin(w))],
                   100 * down[k], 100 * up[k], self.pressure_pa[k]))

    def to_dict(self):
        return {"format": FORMAT, "version": VERSION,
                "table_crc32": None if self.table_crc32 is None else "0x%08x" % self.table_crc32,
                "gas": self.gas, "profile": self.profile, "method": self.method, "info": self.info,
                "points": [[float("%.10g" % v) for v in row] for row in self.points]}


def dumps(band):
    """Sidecar text (JSON, one point a line)."""
    d = band.to_dict()
    pts = d.pop("points")
    head = json.dumps(d, indent=1, sort_keys=False)
    rows = ",\n".join("  [%.10g, %.10g, %.10g, %.10g]" % tuple(r) for r in pts)
    return head[:-2] + ',\n "points": [\n' + rows + "\n ]\n}\n"


def loads(text, table_crc32=None):
    """Sidecar text -> Band; with `table_crc32`, check it belongs to that table."""
    try:
        d = json.loads(text)
    except ValueError:
        raise BandError("band file is not valid JSON")
    if not isinstance(d, dict) or d.get("format") != FORMAT:
        raise BandError("not a band file: field 'format' must be %r" % FORMAT)
    if d.get("version") != VERSION:
        raise BandError("unsupported band file version %r (this build reads %d)"
                        % (d.get("version"), VERSION))
    crc = d.get("table_crc32")
    crc = int(crc, 16) if isinstance(crc, str) else None
    if table_crc32 is not None and crc != table_crc32:
        raise BandError("band belongs to table crc32 %s, not to this table (0x%08x)"
                        % ("none" if crc is None else "0x%08x" % crc, table_crc32))
    return Band(d.get("gas"), d.get("profile"), d.get("points"), d.get("method", ""),
                d.get("info"), crc)


def save(path, band):
    """Write the sidecar atomically (temp file, then rename)."""
    tmp = path + ".tmp"
    with open(tmp, "w", encoding="utf-8") as f:
        f.write(dumps(band))
    os.replace(tmp, path)


def load(path, table_crc32=None):
    """Read the sidecar at `path` (see `loads`). Raises BandError."""
    try:
        with open(path, encoding="utf-8") as f:
            text = f.read()
    except OSError as exc:
        raise BandError("%s: cannot read: %s" % (path, exc.strerror or exc))
    try:
        return loads(text, table_crc32)
    except BandError as exc:
        raise BandError("%s: %s" % (path, exc))
