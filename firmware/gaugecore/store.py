"""Device-side store of gas tables and configuration that survives power loss.

Per table slot (a name such as "ch1") three files in the store's folder:

    ch1.json       active table, what `boot` loads
    ch1.prev.json  the previous good table (fallback)
    ch1.tmp        a new table while it is being written

`install(slot, text)` checks the text first (gaugecore.tablefile: CRC and
table rules, point count, thermocouple type) and refuses a bad table with a
reason before any file is touched. Then:

    1. remove a stale ch1.tmp, write ch1.tmp, close it
    2. read ch1.tmp back: bytes equal and CRC good, else remove it and refuse
    3. remove ch1.prev.json            (ch1.json still holds the old table)
    4. rename ch1.json -> ch1.prev.json  (now only prev and tmp exist)
    5. rename ch1.tmp -> ch1.json

Every rename lands on a name that does not exist, so no step relies on the
filesystem replacing a file. At every instant a verified copy of the old or
the new table is on disk: `boot` loads ch1.json; if it is missing and
ch1.tmp is a valid table (power lost between 4 and 5) it finishes the
install (rename 5); if the active file is missing or damaged it falls back
to ch1.prev.json and says so; if nothing valid is left it returns no table
and a fault, so the channel goes to fault and never shows a made-up pressure.

Filesystems: littlefs (the usual flash filesystem of MicroPython boards)
keeps a file's old contents until the new ones are closed and "if power is
lost the filesystem will fall back to the last known good state" (littlefs
README, github.com/littlefs-project/littlefs), so its rename is atomic.
MicroPython's FAT driver (extmod/vfs_fat.c, fat_vfs_rename) replaces an
existing destination by removing it and renaming again: two steps, which is
why the store removes the destination itself first. A FAT rename is one
directory-entry update; FatFs does not promise it atomic (from memory), so on
FAT the CRC checks and the previous file are the safety net.

The configuration (`save_config`, `load_config`) uses the same pattern with
config.json / config.prev.json / config.tmp: a JSON object wrapped with a
CRC-32 the same way as a table file (body bytes, then the exact tail
'"crc32": "0x........"}' and a newline).

`fs`: an object with `open(path, mode)`, `rename(a, b)`, `remove(path)` and
`mkdir(path)` (OSError on failure, like `os`); files need `read`, `write`,
`close`. Default: the interpreter's own open and os. Tests pass a fake that
counts operations and loses power.
"""

import json
import os

from gaugecore import tablefile
from gaugecore.crc32 import crc32
from gaugecore.table import MAX_POINTS

# Largest table file accepted: 128 points of '%.10g' pairs are about 4 kB; the
# bound keeps a runaway upload from exhausting the heap while it is parsed.
MAX_TABLE_BYTES = 16384
MAX_CONFIG_BYTES = 8192
MAX_SLOT = 24  # like the protocol's table names
CONFIG = "config"
CONFIG_FORMAT = "tcgauge-config"
CONFIG_VERSION = 1
_CRC_KEY = '"crc32": "'
_SLOT_CHARS = "abcdefghijklmnopqrstuvwxyz0123456789_-"


class StoreError(ValueError):
    """A table or configuration was refused; the message gives the reason."""


class OsFs:
    """The interpreter's own filesystem (builtin open and the os module)."""

    def open(self, path, mode):
        return open(path, mode)

    def rename(self, old, new):
        os.rename(old, new)

    def remove(self, path):
        os.remove(path)

    def mkdir(self, path):
        os.mkdir(path)

    def sync(self):
        # MicroPython flushes every mounted filesystem with os.sync().
        if hasattr(os, "sync"):
            os.sync()


def _check_slot(slot):
    if not isinstance(slot, str) or not slot or len(slot) > MAX_SLOT:
        raise StoreError("slot name must be 1..%d characters, got %r" % (MAX_SLOT, slot))
    for ch in slot:
        if ch not in _SLOT_CHARS:
            raise StoreError("slot name %r: only a-z, 0-9, '_' and '-' are allowed" % slot)
    if slot == CONFIG:
        raise StoreError("slot name %r is reserved" % slot)


def _check_table(table, expect_tc_type, max_points):
    if len(table.points) > max_points:
        raise StoreError("table refused: %d points, this store holds at most %d"
                         % (len(table.points), max_points))
    if expect_tc_type is not None and table.tc_type != expect_tc_type:
        raise StoreError("table refused: thermocouple type %s, the channel is type %s"
                         % (table.tc_type, expect_tc_type))


def _finite_json(value, where):
    """Raise StoreError unless value is plain JSON (no NaN or inf, string keys)."""
    if value is None or isinstance(value, (bool, str)):
        return
    if isinstance(value, (int, float)):
        if value - value != 0:
            raise StoreError("config refused: %s is not a finite number" % where)
        return
    if isinstance(value, (list, tuple)):
        for i in range(len(value)):
            _finite_json(value[i], "%s[%d]" % (where, i))
        return
    if isinstance(value, dict):
        for key in value:
            if not isinstance(key, str):
                raise StoreError("config refused: %s has a key that is not a string" % where)
            _finite_json(value[key], "%s.%s" % (where, key))
        return
    raise StoreError("config refused: %s is not a JSON value" % where)


def config_dumps(config):
    """The configuration dict as CRC-checked file text."""
    if not isinstance(config, dict):
        raise StoreError("config refused: expected a dict")
    _finite_json(config, "config")
    body = '{"format": "%s", "version": %d,\n "config": %s,\n ' % (
        CONFIG_FORMAT, CONFIG_VERSION, json.dumps(config))
    return body + '%s0x%08x"}\n' % (_CRC_KEY, crc32(body.encode("utf-8")))


def config_loads(data):
    """File text (bytes or str) -> configuration dict. Raises StoreError."""
    if isinstance(data, (bytes, bytearray)):
        try:
            data = data.decode("utf-8")
        except ValueError:
            raise StoreError("config file: not UTF-8 text")
    cut = data.rfind(_CRC_KEY)
    if cut < 0:
        raise StoreError("config file: no crc32 field (truncated?)")
    tail = data[cut + len(_CRC_KEY):]
    if len(tail) != 13 or tail[:2] != "0x" or tail[10:] != '"}\n':
        raise StoreError("config file: crc32 field does not close the file (truncated?)")
    try:
        file_crc = int(tail[2:10], 16)
    except ValueError:
        raise StoreError("config file: crc32 is not hexadecimal")
    got = crc32(data[:cut].encode("utf-8"))
    if got != file_crc:
        raise StoreError("config file: crc mismatch: file says 0x%08x, content gives 0x%08x"
                         % (file_crc, got))
    try:
        doc = json.loads(data)
    except ValueError:
        raise StoreError("config file: not valid JSON")
    if not isinstance(doc, dict) or doc.get("format") != CONFIG_FORMAT:
        raise StoreError("config file: not a %s file" % CONFIG_FORMAT)
    if doc.get("version") != CONFIG_VERSION:
        raise StoreError("config file: unsupported version %r" % (doc.get("version"),))
    cfg = doc.get("config")
    if not isinstance(cfg, dict):
        raise StoreError("config file: field 'config' is not an object")
    return cfg


def _same_kind(default, value):
    if isinstance(default, bool) or isinstance(value, bool):
        return isinstance(default, bool) and isinstance(value, bool)
    if isinstance(default, (int, float)):
        return isinstance(value, (int, float))
    if default is None:
        return True
    return type(default) is type(value)


class Store:
    """Tables per slot and one configuration under the folder `root`.

    expect_tc_type: optional dict slot -> thermocouple type letter of the
    channel the slot feeds; a table of another type is refused (install)
    or not used (boot). max_points: memory bound (at most
    gaugecore.table.MAX_POINTS).
    """

    def __init__(self, root="tables", fs=None, expect_tc_type=None, max_points=MAX_POINTS,
                 max_bytes=MAX_TABLE_BYTES):
        self.root = root.rstrip("/") if len(root) > 1 else root
        self.fs = fs if fs is not None else OsFs()
        self.expect_tc_type = expect_tc_type or {}
        self.max_points = max_points if max_points < MAX_POINTS else MAX_POINTS
        self.max_bytes = max_bytes

    # ------------------------------------------------------------- paths
    def paths(self, slot):
        """(active, previous, temporary) file paths of a slot."""
        base = self.root + "/" + slot
        return (base + ".json", base + ".prev.json", base + ".tmp")

    # ------------------------------------------------------------- file steps
    def _mkdir(self):
        try:
            self.fs.mkdir(self.root)
        except OSError:
            pass  # exists already (or cannot be made: the open below says so)

    def _read(self, path, limit):
        f = self.fs.open(path, "rb")
        try:
            data = f.read(limit + 1)
        finally:
            f.close()
        if len(data) > limit:
            raise StoreError("%s is larger than %d bytes" % (path, limit))
        return data

    def _remove_quiet(self, path):
        try:
            self.fs.remove(path)
        except OSError:
            pass  # not there

    def _replace(self, paths, data, check, limit):
        """Write data to the temporary file, verify it with check(bytes), then
        rotate active -> previous and temporary -> active (module docstring)."""
        active, prev, tmp = paths
        self._mkdir()
        self._remove_quiet(tmp)
        try:
            f = self.fs.open(tmp, "wb")
            try:
                f.write(data)
            finally:
                f.close()
            back = self._read(tmp, limit)
            if back != data:
                raise StoreError("write failed: read-back of %s differs from what was written" % tmp)
            check(back)
        except Exception:
            self._remove_quiet(tmp)
            raise
        if hasattr(self.fs, "sync"):
            self.fs.sync()
        have_active = True
        try:
            self.fs.open(active, "rb").close()
        except OSError:
            have_active = False
        if have_active:
            self._remove_quiet(prev)
            self.fs.rename(active, prev)
        self.fs.rename(tmp, active)
        if hasattr(self.fs, "sync"):
            self.fs.sync()

    # ------------------------------------------------------------- tables
    def check(self, slot, text, expect_tc_type=None):
        """Parse and validate table file text for `slot` -> (Table, crc32). Raises StoreError."""
        _check_slot(slot)
        if expect_tc_type is None:
            expect_tc_type = self.expect_tc_type.get(slot)
        if len(text) > self.max_bytes:
            raise StoreError("table refused: %d bytes, at most %d" % (len(text), self.max_bytes))
        try:
            table, crc = tablefile.parse(text)
        except ValueError as exc:
            raise StoreError("table refused: %s" % exc)
        _check_table(table, expect_tc_type, self.max_points)
        return table, crc

    def install(self, slot, text, expect_tc_type=None):
        """Check table file text and make it the slot's active table (the old
        one becomes the previous). Returns (Table, crc32). StoreError with the
        reason if refused (nothing on disk changes), OSError if the
        filesystem fails."""
        if isinstance(text, str):
            text = text.encode("utf-8")
        table, crc = self.check(slot, text, expect_tc_type)

        def verify(back):
            if tablefile.parse(back)[1] != crc:
                raise StoreError("write failed: read-back crc differs")

        self._replace(self.paths(slot), bytes(text), verify, self.max_bytes)
        return table, crc

    def _load(self, path, slot, expect_tc_type):
        """(Table, None) or (None, reason)."""
        try:
            data = self._read(path, self.max_bytes)
        except OSError:
            return None, "missing"
        except StoreError as exc:
            return None, str(exc)
        try:
            table = tablefile.loads(data)
            _check_table(table, expect_tc_type, self.max_points)
        except ValueError as exc:
            return None, str(exc)
        return table, None

    def boot(self, slot, expect_tc_type=None):
        """The slot's table at start-up -> (Table or None, fault str or None).

        Active file first; an install cut short after its temporary file was
        verified is finished; else the previous file, with a fault saying
        so; with nothing valid, (None, fault): the channel must go to fault.
        """
        _check_slot(slot)
        if expect_tc_type is None:
            expect_tc_type = self.expect_tc_type.get(slot)
        active, prev, tmp = self.paths(slot)
        table, why = self._load(active, slot, expect_tc_type)
        if table is not None:
            return table, None
        if why == "missing":
            new, why_tmp = self._load(tmp, slot, expect_tc_type)
            if new is not None:
                try:
                    self.fs.rename(tmp, active)
                except OSError:
                    return new, "table %s: install was interrupted; using the verified new table" % slot
                return new, "table %s: install was interrupted; finished it" % slot
            what = "active file missing"
        else:
            what = "active file corrupt (%s)" % why
        old, why_prev = self._load(prev, slot, expect_tc_type)
        if old is not None:
            return old, "table %s: %s, using previous" % (slot, what)
        if why == "missing" and why_prev == "missing":
            return None, "table %s: no table installed" % slot
        return None, "table %s: %s and previous %s; no table" % (
            slot, what, "missing" if why_prev == "missing" else "corrupt (%s)" % why_prev)

    def remove(self, slot):
        """Delete every file of a slot (active, previous and temporary)."""
        _check_slot(slot)
        for path in self.paths(slot):
            self._remove_quiet(path)

    # ------------------------------------------------------------- configuration
    def save_config(self, config):
        """Store the configuration dict atomically. StoreError if it is not plain JSON."""
        data = config_dumps(config).encode("utf-8")
        if len(data) > MAX_CONFIG_BYTES:
            raise StoreError("config refused: %d bytes, at most %d" % (len(data), MAX_CONFIG_BYTES))
        self._replace(self.paths(CONFIG), data, config_loads, MAX_CONFIG_BYTES)

    def _load_config_file(self, path):
        try:
            return config_loads(self._read(path, MAX_CONFIG_BYTES)), None
        except OSError:
            return None, "missing"
        except StoreError as exc:
            return None, str(exc)

    def load_config(self, defaults):
        """-> (config dict, fault str or None).

        A copy of `defaults` with the stored values laid over it: only keys
        that `defaults` has, and only values of the same kind (number, bool,
        string, list, dict); others are dropped and named in the fault.
        Falls back to the previous file, then to the defaults alone.
        """
        active, prev, tmp = self.paths(CONFIG)
        stored, why = self._load_config_file(active)
        fault = None
        if stored is None and why == "missing":
            stored, why_tmp = self._load_config_file(tmp)
            if stored is not None:
                try:
                    self.fs.rename(tmp, active)
                except OSError:
                    pass
                fault = "config: save was interrupted; finished it"
        if stored is None:
            old, why_prev = self._load_config_file(prev)
            if old is not None:
                stored = old
                fault = "config: active file %s, using previous" % (
                    "missing" if why == "missing" else "corrupt")
            elif why == "missing" and why_prev == "missing":
                stored = {}
            else:
                stored = {}
                fault = "config: no usable file, using defaults"
        out = {}
        for key in defaults:
            out[key] = defaults[key]
        dropped = []
        for key in stored:
            if key in defaults and _same_kind(defaults[key], stored[key]):
                out[key] = stored[key]
            else:
                dropped.append(key)
        if dropped:
            dropped.sort()
            note = "config: ignored %s" % ", ".join(dropped)
            fault = note if fault is None else fault + "; " + note
        return out, fault
