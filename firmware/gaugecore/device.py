"""The device facade: every command of gaugecore.commands bound to the core.

`Device` is what gaugecore.scpi.Dispatcher calls (method names from the
command table; channel and setpoint numbers start at 1). It owns the
configuration: every setting that changes what the device does is written
through the store (gaugecore.store: `save_config(dict)`,
`load_config(defaults) -> (dict, fault)`) at once, so it survives a reset.
Streaming is not stored: after power-up the device is quiet until asked.

Configuration (one dict; the store checks the kind of each top-level key,
this module checks every element and falls back to the default per item):
  unit        "PA", "TORR", "MBAR" or "MICRON"
  rate_hz     sample rate of every channel (sample period whole ms), at most the
              device's `rate_max_hz` (what its converters can do; a board's
              main.py sets it, RATE_MAX_HZ otherwise)
  tables      table name per channel (gaugecore.catalogue)
  heater_ma   heater current setpoint per channel, within the tube's limits
  fast        fast-response estimate per channel
  zero        ZeroResult.to_dict() per channel, or None (never zeroed)
  setpoints   per setpoint: source, on_pa, off_pa, direction, delay_s, enable

Readings of a faulted channel never carry a number: pressure, EMF,
junction temperature and heater current are all None (NAN on the wire).

Setpoint n drives relay n of the device's relay list. Its levels may be set
one at a time while it is disabled; an enabled setpoint only accepts a
consistent set (off above on for BELow, below on for ABOVe, both inside the
table's range), else Settings conflict (-221). Setpoints are process aids,
never safety interlocks (see gaugecore.setpoint).

*TST? code (0 = passed; bits add up):
  1   a table file in the catalogue fails its check
  2, 4, 8   channel 1: thermocouple input, cold junction, heater fault
  16, 32, 64  channel 2: the same (and so on, three bits per channel)
"""

from gaugecore import commands as C
from gaugecore import states
from gaugecore.setpoint import Setpoint, BELOW, ABOVE
from gaugecore.version import VERSION

RATE_MIN_HZ = 0.1
RATE_MAX_HZ = 50.0
DEFAULT_UNIT = "PA"
DEFAULT_RATE_HZ = 10.0
DEFAULT_SP_ON_PA = 1.0  # invented demo default, inside the demo table's range
DEFAULT_SP_OFF_PA = 2.0  # invented demo default

_TST_TABLES = 1
_TC_FAULTS = ("adc-failure", "tc-open", "tc-short", "stale")
_HEATER_FAULTS = ("heater-open", "heater-short")


def default_config(n_channels, n_setpoints, table_name, heater_ma):
    """The configuration after *RST (and when nothing is stored)."""
    sps = []
    for n in range(1, n_setpoints + 1):
        sps.append({
            "source": (n - 1) % n_channels + 1,
            "on_pa": DEFAULT_SP_ON_PA,
            "off_pa": DEFAULT_SP_OFF_PA,
            "direction": "BELOW",
            "delay_s": 0.0,
            "enable": False,
        })
    return {
        "unit": DEFAULT_UNIT,
        "rate_hz": DEFAULT_RATE_HZ,
        "tables": [table_name] * n_channels,
        "heater_ma": [float(heater_ma)] * n_channels,
        "fast": [False] * n_channels,
        "zero": [None] * n_channels,
        "setpoints": sps,
    }


def _num(x):
    return (isinstance(x, int) or isinstance(x, float)) and not isinstance(x, bool) and x - x == 0


def _clean(config, defaults, n_channels, n_setpoints):
    """Per-item check of a loaded config: bad items fall back to the default.

    Returns (config, list of the item names replaced).
    """
    bad = []
    out = {}
    u = config.get("unit")
    out["unit"] = u if u in C.UNITS else defaults["unit"]
    if out["unit"] != u:
        bad.append("unit")
    r = config.get("rate_hz")
    ok = _num(r) and RATE_MIN_HZ <= r <= RATE_MAX_HZ
    out["rate_hz"] = float(r) if ok else defaults["rate_hz"]
    if not ok:
        bad.append("rate_hz")
    for key, check in (("tables", lambda v: isinstance(v, str) and 0 < len(v) <= C.MAX_NAME),
                       ("heater_ma", _num),
                       ("fast", lambda v: isinstance(v, bool)),
                       ("zero", lambda v: v is None or isinstance(v, dict))):
        got = config.get(key)
        items = []
        for i in range(n_channels):
            v = got[i] if isinstance(got, list) and i < len(got) else None
            if (v is None and key != "zero") or not check(v):
                items.append(defaults[key][i])
                bad.append("%s[%d]" % (key, i + 1))
            else:
                items.append(v)
        out[key] = items
    got = config.get("setpoints")
    sps = []
    for i in range(n_setpoints):
        d = defaults["setpoints"][i]
        v = got[i] if isinstance(got, list) and i < len(got) else None
        if not isinstance(v, dict):
            sps.append(dict(d))
            bad.append("setpoints[%d]" % (i + 1))
            continue
        sp = {}
        for k in d:
            x = v.get(k)
            good = False
            if k == "source":
                good = isinstance(x, int) and not isinstance(x, bool) and 1 <= x <= n_channels
            elif k == "on_pa" or k == "off_pa":
                good = _num(x) and x > 0.0
            elif k == "direction":
                good = x == "BELOW" or x == "ABOVE"
            elif k == "delay_s":
                good = _num(x) and 0.0 <= x <= 600.0
            elif k == "enable":
                good = isinstance(x, bool)
            sp[k] = x if good else d[k]
            if not good:
                bad.append("setpoints[%d].%s" % (i + 1, k))
        sps.append(sp)
    out["setpoints"] = sps
    return out, bad


class Device:
    """Facade over the controller's channels (see the module docstring).

    channels: gaugecore.channel.Channel objects, channel n is channels[n-1].
    controller: gaugecore.controller.Controller (its clock gives now_ms).
    store: gaugecore.store.Store (configuration). catalogue:
    gaugecore.catalogue.Catalogue. relays: one relay per setpoint.
    limits: per channel the profile limits dict the channel was built with.
    config: the configuration to apply (from `load`), defaults: for *RST.
    rate_max_hz: the fastest sample rate this hardware sustains; a faster
    CONFigure:RATE is refused (-222), a faster stored rate is replaced by
    the default one with a note.
    """

    def __init__(self, channels, controller, store, catalogue, relays, limits, config, defaults,
                 serial="0", notes=(), rate_max_hz=RATE_MAX_HZ):
        if not RATE_MIN_HZ <= rate_max_hz <= RATE_MAX_HZ:
            raise ValueError("maximum rate %.6g Hz not in %.6g..%.6g Hz"
                             % (rate_max_hz, RATE_MIN_HZ, RATE_MAX_HZ))
        if defaults["rate_hz"] > rate_max_hz:
            raise ValueError("default rate %.6g Hz is above the maximum %.6g Hz"
                             % (defaults["rate_hz"], rate_max_hz))
        self.rate_max_hz = float(rate_max_hz)
        self.channels = tuple(channels)
        self.controller = controller
        self.store = store
        self.catalogue = catalogue
        self.limits = tuple(limits)
        self.serial = serial
        self.errors = None  # the dispatcher (push_error) once a service runs
        self.notes = list(notes)  # boot messages for the error queue
        self.streaming = False
        self._defaults = defaults
        self._zeros = [None] * len(self.channels)  # the VacuumZero each channel runs
        self._setpoints = []
        for n in range(1, len(relays) + 1):
            name = "SP%d" % n
            self._setpoints.append(Setpoint(relays[n - 1], DEFAULT_SP_ON_PA, DEFAULT_SP_OFF_PA,
                                            name=name))
        self._attached = [None] * len(relays)  # channel index each setpoint is attached to
        self._upload = None  # gaugecore.tablexfer.Upload while a table upload is open
        self.config = config
        if config["rate_hz"] > self.rate_max_hz:
            self._note("config: %.6g Hz is above this board's %.6g Hz, using %.6g Hz"
                       % (config["rate_hz"], self.rate_max_hz, defaults["rate_hz"]))
            config["rate_hz"] = defaults["rate_hz"]
        self._apply_all()

    # ---------------------------------------------------------------- helpers
    def _ch(self, n):
        if not 1 <= n <= len(self.channels):
            raise C.RangeError("channel %d not in 1..%d" % (n, len(self.channels)))
        return self.channels[n - 1]

    def _save(self):
        self.store.save_config(self.config)

    def _note(self, text):
        if self.errors is not None:
            self.errors.push_error(C.E_EXECUTION, text)
        else:
            self.notes.append(text)

    def now_ms(self):
        """The controller's monotonic milliseconds."""
        return self.controller.now_ms()

    def ident(self):
        """The four *IDN? fields."""
        return C.ident(self.serial, VERSION)

    def n_setpoints(self):
        """Number of setpoints (one per relay)."""
        return len(self._setpoints)

    def _apply_all(self):
        """Put the whole configuration into the channels and setpoints."""
        cfg = self.config
        self._apply_rate(cfg["rate_hz"])
        for i in range(len(self.channels)):
            ch = self.channels[i]
            z = cfg["zero"][i]
            if z is not None:
                try:
                    from gaugecore.zero import ZeroResult

                    ch.apply_zero(ZeroResult.from_dict(z))
                except ValueError as exc:
                    cfg["zero"][i] = None
                    self._note("config: zero of channel %d dropped: %s" % (i + 1, exc))
            lim = self.limits[i]
            ma = cfg["heater_ma"][i]
            if not lim["min_ma"] <= ma <= lim["max_ma"]:
                self._note("config: heater %.1f mA of channel %d outside the tube's range" % (ma, i + 1))
                ma = cfg["heater_ma"][i] = lim["nominal_ma"]
            ch.regulator.set_target(ma)
            ch.set_fast(cfg["fast"][i])
        for n in range(1, len(self._setpoints) + 1):
            sp = cfg["setpoints"][n - 1]
            if sp["enable"]:
                try:
                    self._apply_sp(n, sp)
                except ValueError as exc:
                    sp["enable"] = False
                    self._note("config: setpoint %d disabled: %s" % (n, exc))
                    self._apply_sp(n, sp)
            else:
                self._apply_sp(n, sp)

    def _apply_rate(self, hz):
        period_ms = int(round(1000.0 / hz))
        for ch in self.channels:
            s = ch.sampler
            if s._n_reads * s.settle_ms >= period_ms:
                raise C.RangeError("%.6g Hz is too fast for this channel's settle windows" % hz)
        for ch in self.channels:
            ch.sampler.period_ms = period_ms
            mon = ch.monitor
            mon.sample_ms = period_ms
            # staleness scales with the period (the monitor's 500 ms is for 10 Hz)
            mon.stale_ms = 5 * period_ms if 5 * period_ms > 500 else 500

    # ---------------------------------------------------------------- common
    def reset(self):
        """*RST: defaults for every setting (zero results are calibration: kept)."""
        zeros = self.config["zero"]
        cfg = {}
        for key in self._defaults:
            v = self._defaults[key]
            if isinstance(v, list):
                v = [dict(x) if isinstance(x, dict) else x for x in v]
            cfg[key] = v
        cfg["zero"] = list(zeros)
        tables = cfg["tables"]
        for i in range(len(self.channels)):
            if self.config["tables"][i] != tables[i]:
                self._select_table(i + 1, tables[i])
        self.config = cfg
        for i in range(len(self.channels)):
            if zeros[i] is not None:
                cfg["heater_ma"][i] = zeros[i]["heater_ma"]
        self.streaming = False
        self._apply_all()
        self._save()

    def self_test(self):
        """*TST?: check the tables and ask every sensor; 0 or the fault bits."""
        code = 0
        for name in self.catalogue.names():
            try:
                self.catalogue.load(name)
            except (ValueError, OSError) as exc:
                code |= _TST_TABLES
                self._note("self-test: table %s: %s" % (name, _text(exc)))
        for i in range(len(self.channels)):
            ch = self.channels[i]
            bit = 2 << (3 * i)
            mon = ch.monitor
            try:
                uv = ch.sampler.tc.read_uv()
                if uv != uv:
                    raise OSError("no number")
                bad = None
                for name in _TC_FAULTS:
                    if mon.is_active(name):
                        bad = name
                if bad is not None:
                    raise OSError(bad)
            except OSError as exc:
                code |= bit
                self._note("self-test ch%d tc: %s" % (i + 1, _text(exc)))
            try:
                t_c = ch.sampler.cj.read_c()
                if not mon.cj_min_c <= t_c <= mon.cj_max_c:
                    raise OSError("%.1f C is outside %.0f..%.0f C" % (t_c, mon.cj_min_c, mon.cj_max_c))
            except OSError as exc:
                code |= bit << 1
                self._note("self-test ch%d cj: %s" % (i + 1, _text(exc)))
            for name in _HEATER_FAULTS:
                if mon.is_active(name):
                    code |= bit << 2
                    self._note("self-test ch%d heater: %s" % (i + 1, name))
        return code

    # ---------------------------------------------------------------- measurement
    def pressure(self, n):
        """(pressure_pa or None, state, fault or None) of channel n."""
        ch = self._ch(n)
        if ch.state == states.FAULT:
            return (None, states.FAULT, ch.fault)
        if ch.state == states.INVALID:
            return (None, states.INVALID, None)
        return (ch.pressure_pa, ch.state, None)

    def _number(self, ch, value):
        if ch.state == states.FAULT or ch.seq == 0:
            return None
        return value

    def emf_mv(self, n):
        """Measured thermocouple EMF in mV (pickup cancelled), None if faulted."""
        ch = self._ch(n)
        return self._number(ch, ch.emf_mv)

    def junction_c(self, n):
        """Cold-junction temperature in C, None if faulted or not read."""
        ch = self._ch(n)
        return self._number(ch, ch.cj_c)

    def heater_ma(self, n):
        """Measured heater current in mA, None if faulted."""
        ch = self._ch(n)
        return self._number(ch, ch.heater_ma)

    # ---------------------------------------------------------------- configuration
    def table(self, n):
        """Name of the table channel n converts with."""
        self._ch(n)
        return self.config["tables"][n - 1]

    def _select_table(self, n, name):
        ch = self._ch(n)
        if name not in self.catalogue.names():
            raise ValueError("no table named %s on the device" % name)
        text = self.catalogue.text(name)
        table, crc = self.store.check("ch%d" % n, text, ch.table.tc_type)
        for k in range(len(self._setpoints)):
            sp = self.config["setpoints"][k]
            if sp["enable"] and sp["source"] == n:
                _check_levels(sp, table, k + 1)
        self.store.install("ch%d" % n, text, ch.table.tc_type)
        ch.set_table(table)
        self.config["tables"][n - 1] = name

    def set_table(self, n, name):
        """Select table `name` for channel n (kept in the store's slot chN too)."""
        self._select_table(n, name)
        self._save()

    def unit(self):
        """Pressure unit of replies and pressure arguments."""
        return self.config["unit"]

    def set_unit(self, unit):
        unit = unit.upper()
        if unit not in C.UNITS:
            raise ValueError("unknown unit %s" % unit)
        self.config["unit"] = unit
        self._save()

    def rate_hz(self):
        """Sample rate in Hz, as the whole-ms period makes it."""
        return 1000.0 / self.channels[0].sampler.period_ms

    def set_rate_hz(self, hz):
        if not RATE_MIN_HZ <= hz <= self.rate_max_hz:
            raise C.RangeError("%.6g Hz not in %.6g..%.6g Hz" % (hz, RATE_MIN_HZ, self.rate_max_hz))
        self._apply_rate(hz)
        self.config["rate_hz"] = float(hz)
        self._save()

    def heater_target_ma(self, n):
        """Heater current setpoint of channel n in mA."""
        return self._ch(n).regulator.target_ma

    def set_heater_target_ma(self, n, ma):
        ch = self._ch(n)
        lim = self.limits[n - 1]
        if not lim["min_ma"] <= ma <= lim["max_ma"]:
            raise C.RangeError("%.1f mA not in this tube's %.1f..%.1f mA" % (ma, lim["min_ma"], lim["max_ma"]))
        ch.regulator.set_target(ma)
        self.config["heater_ma"][n - 1] = float(ma)
        self._save()

    def fast(self, n):
        """True if channel n uses the fast-response estimate."""
        return self._ch(n).fast

    def set_fast(self, n, on):
        self._ch(n).set_fast(on)
        self.config["fast"][n - 1] = bool(on)
        self._save()

    # ---------------------------------------------------------------- setpoints
    def _sp(self, n):
        return self.config["setpoints"][n - 1]

    def _apply_sp(self, n, sp):
        """Configure setpoint n from `sp` and attach it to its source (ValueError if inconsistent)."""
        obj = self._setpoints[n - 1]
        if sp["enable"]:
            ch = self._ch(sp["source"])
            _check_levels(sp, ch.table, n)
            obj.configure(sp["on_pa"], sp["off_pa"], BELOW if sp["direction"] == "BELOW" else ABOVE,
                          int(round(sp["delay_s"] * 1000.0)))
        old = self._attached[n - 1]
        if old is not None:
            lst = self.channels[old].setpoints
            if obj in lst:
                lst.remove(obj)
            self._attached[n - 1] = None
        if sp["enable"]:
            self.channels[sp["source"] - 1].add_setpoint(obj)
            self._attached[n - 1] = sp["source"] - 1
        elif obj.energised:
            obj.update(None, "disabled", self.now_ms())  # fail-safe path: relay released now

    def _set_sp(self, n, key, value):
        sp = self._sp(n)
        new = dict(sp)
        new[key] = value
        self._apply_sp(n, new)  # raises (nothing changed) when inconsistent
        self.config["setpoints"][n - 1] = new
        self._save()

    def sp_source(self, n):
        return self._sp(n)["source"]

    def set_sp_source(self, n, ch):
        self._ch(ch)
        self._set_sp(n, "source", ch)

    def sp_on_pa(self, n):
        return self._sp(n)["on_pa"]

    def set_sp_on_pa(self, n, pressure_pa):
        self._set_sp(n, "on_pa", float(pressure_pa))

    def sp_off_pa(self, n):
        return self._sp(n)["off_pa"]

    def set_sp_off_pa(self, n, pressure_pa):
        self._set_sp(n, "off_pa", float(pressure_pa))

    def sp_direction(self, n):
        return self._sp(n)["direction"]

    def set_sp_direction(self, n, word):
        self._set_sp(n, "direction", word.upper())

    def sp_delay_s(self, n):
        return self._sp(n)["delay_s"]

    def set_sp_delay_s(self, n, delay_s):
        self._set_sp(n, "delay_s", float(delay_s))

    def sp_enable(self, n):
        return self._sp(n)["enable"]

    def set_sp_enable(self, n, on):
        self._set_sp(n, "enable", bool(on))

    def sp_relay(self, n):
        """True while setpoint n's relay is energised."""
        return self._setpoints[n - 1].energised

    def sp_events(self, n):
        """Setpoint n's recorded output changes (time_ms, energised, cause)."""
        return self._setpoints[n - 1].events

    # ---------------------------------------------------------------- zero, faults
    def zero(self, n):
        """Start a vacuum zero on channel n; its outcome is stored when it ends."""
        ch = self._ch(n)
        if ch.zero is not None:
            raise C.ConflictError("channel %d: a zero is already running" % n)
        if ch.state == states.FAULT:
            raise C.ConflictError("channel %d has a fault: %s" % (n, ch.fault))
        self._zeros[n - 1] = ch.start_zero(self.now_ms())

    def zero_mv(self, n):
        """EMF left at the last zero minus the tube's nominal zero EMF, mV (None: never zeroed)."""
        self._ch(n)
        z = self.config["zero"][n - 1]
        if z is None:
            return None
        return z["emf_mv"] - self.limits[n - 1]["zero_emf_mv"]

    def zero_running(self, n):
        """True while channel n's vacuum zero runs."""
        return self._ch(n).zero is not None

    def fault(self, n):
        """Active fault name of channel n, or None."""
        return self._ch(n).monitor.active

    def clear_fault(self, n):
        self._ch(n).clear_faults()

    # ---------------------------------------------------------------- stream, tables
    def stream(self):
        return self.streaming

    def set_stream(self, on):
        self.streaming = bool(on)

    def memory_free(self):
        """DIAG:MEM:FREE?: free heap bytes after a collection (gc.mem_free); -1 under CPython."""
        import gc

        gc.collect()
        free = getattr(gc, "mem_free", None)  # MicroPython only
        return -1 if free is None else free()

    def tables(self):
        """Names of the tables in the catalogue."""
        return self.catalogue.names()

    # ---------------------------------------------------------------- table transfer
    # See gaugecore.tablexfer for the chunk coding; the store does every check of
    # the table itself and the atomic install (the old table stays the fallback).
    def _catalogue_store(self):
        """A Store over the catalogue folder: name.json, name.prev.json, name.tmp."""
        from gaugecore.store import Store

        st = self.store
        return Store(self.catalogue.folder, st.fs, max_points=st.max_points, max_bytes=st.max_bytes)

    def table_crc(self, name):
        """CRC-32 text ('0x........') of catalogue table `name` (its file is checked)."""
        from gaugecore import tablefile
        from gaugecore.tablexfer import crc32_text

        try:
            return crc32_text(tablefile.parse(self.catalogue.text(name))[1])
        except tablefile.TableFileError as exc:
            raise OSError("table %s: %s" % (name, exc))

    def active_crc(self, n):
        """CRC-32 text of the table channel n converts with: its file's (Table.file_crc32), or
        for a table made in memory that of its canonical file."""
        from gaugecore.tablexfer import crc32_text

        table = self._ch(n).table
        crc = table.file_crc32
        if crc is None:
            from gaugecore import tablefile

            crc = tablefile.parse(tablefile.dumps(table))[1]
        return crc32_text(crc)

    def upload_begin(self, name, channel, nbytes, crc_text):
        """Open an upload (an unfinished one is dropped): name, channel 0..N, bytes, CRC-32."""
        from gaugecore.store import _check_slot
        from gaugecore.tablexfer import Upload, parse_crc32

        if channel != 0:
            self._ch(channel)
        try:
            _check_slot(name)
        except ValueError:
            raise ValueError("table name %s: use a-z, 0-9, _ and -" % name)
        if nbytes > self.store.max_bytes:
            raise C.RangeError("%d bytes: a table file holds at most %d" % (nbytes, self.store.max_bytes))
        self._upload = None
        self._upload = Upload(name, channel, nbytes, parse_crc32(crc_text))

    def _open_upload(self):
        if self._upload is None:
            raise OSError("no table upload in progress")
        return self._upload

    def upload_data(self, index, text, chunk_crc):
        """Take one chunk (gaugecore.tablexfer.Upload.add); a refused chunk changes nothing."""
        self._open_upload().add(index, text, chunk_crc)

    def upload_next(self):
        """Index of the chunk the open upload expects, -1 when none is open."""
        return -1 if self._upload is None else self._upload.next_index

    def upload_abort(self):
        """Drop the upload in progress, if any."""
        self._upload = None

    def upload_end(self):
        """Check the upload, install it (catalogue, then the channel) -> its CRC-32 text.

        Any refusal leaves every table as it was; the upload is closed either way.
        """
        from gaugecore.tablexfer import crc32_text

        up = self._open_upload()
        self._upload = None
        data = up.finish()
        tc_types = []
        for ch in self.channels:
            if ch.table.tc_type not in tc_types:
                tc_types.append(ch.table.tc_type)
        n = up.channel
        want = self._ch(n).table.tc_type if n else None
        cat = self._catalogue_store()
        table, crc = cat.check(up.name, data, want)
        if want is None and table.tc_type not in tc_types:
            raise ValueError("table refused: thermocouple type %s, the channels are type %s"
                             % (table.tc_type, "/".join(tc_types)))
        if n:
            for k in range(len(self._setpoints)):
                sp = self.config["setpoints"][k]
                if sp["enable"] and sp["source"] == n:
                    _check_levels(sp, table, k + 1)
        cat.install(up.name, data, want)
        if n:
            self.set_table(n, up.name)
        return crc32_text(crc)

    def table_chunk(self, name, index):
        """Chunk `index` of catalogue table `name` -> (CRC-16 as decimal text, base64 text)."""
        from gaugecore.tablexfer import DOWNLOAD_CHUNK, chunk_of

        path = self.catalogue.path(name)
        f = open(path, "rb")
        try:
            f.seek(index * DOWNLOAD_CHUNK)
            part = f.read(DOWNLOAD_CHUNK)
        finally:
            f.close()
        crc, text = chunk_of(part, 0)
        return ("%d" % crc, text)

    # ---------------------------------------------------------------- per reading
    def on_reading(self, ch):
        """Bookkeeping after each reading (the service calls it): a finished zero is stored."""
        i = ch.index
        z = self._zeros[i]
        if z is None or ch.zero is not None:
            return
        self._zeros[i] = None
        if z.result is not None:
            self.config["zero"][i] = z.result.to_dict()
            self.config["heater_ma"][i] = z.result.heater_ma
            self._save()
        else:
            self._note("zero of channel %d refused: %s" % (i + 1, z.reason or "stopped"))


def _check_levels(sp, table, n):
    """ConflictError unless setpoint levels agree with each other and with the table."""
    on = sp["on_pa"]
    off = sp["off_pa"]
    if sp["direction"] == "BELOW" and not off > on:
        raise C.ConflictError("SP%d: off level must be above the on level for BELow" % n)
    if sp["direction"] == "ABOVE" and not off < on:
        raise C.ConflictError("SP%d: off level must be below the on level for ABOVe" % n)
    lo = on if on < off else off
    hi = off if on < off else on
    if lo < table.p_min_pa or hi > table.p_max_pa:
        raise C.ConflictError("SP%d: levels outside the table's %.3g..%.3g Pa"
                              % (n, table.p_min_pa, table.p_max_pa))


def _text(exc):
    if exc.args and isinstance(exc.args[0], str):
        return exc.args[0]
    return type(exc).__name__


def load(store, n_channels, n_setpoints, defaults):
    """(config, notes) from the store, checked item by item against `defaults`."""
    try:
        stored, fault = store.load_config(defaults)
    except (ValueError, OSError) as exc:
        stored, fault = defaults, "config: %s" % _text(exc)
    cfg, bad = _clean(stored, defaults, n_channels, n_setpoints)
    notes = []
    if fault:
        notes.append(fault)
    if bad and stored is not defaults:
        notes.append("config: defaults used for %s" % ", ".join(bad[:6]))
    return cfg, notes
