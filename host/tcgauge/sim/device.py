"""The virtual device: the real controller on the simulator, behind a port.

    dev = VirtualDevice(scenario="pumpdown", speed=10, seed=1)
    path = dev.serve_pty()          # a pseudo-terminal: open it like a board
    ...
    dev.close()

or in-process, `dev.connect()` -> a PipePort whose host side pyserial's
`sim://` handler (tcgauge.urlhandler.protocol_sim) wraps.

Inside: a Bench (tcgauge.sim.bench) gives the hardware objects; the device
is built by gaugecore.assembly.build exactly as the board builds it, and
gaugecore.service.Service runs the protocol. One thread runs an asyncio
loop with the controller's task (Controller.run) and the service's task,
as the board's main.py does. The controller's sleep advances the simulated
clock and then waits until the wall clock has caught up with simulated
time / speed; when the host machine cannot keep up, simulated time lags
by at most MAX_LAG_S and the excess is dropped (counted in `lag_resets`).

The device's output is paced at `baud` / 10 bytes per second (8N1) through
a transmit buffer of TX_BUFFER bytes, like a board's UART; baud=None
does not limit it. Its files (tables/, store/) live under `root` (a fresh
temporary folder by default, removed on close): pass the same root to a
new VirtualDevice to see the stored configuration survive a reset.

`zeroed=True` gives a fresh device what an instrument keeps from its last
set-up: a vacuum zero per channel (heater current and the heat-balance
parameters the fast-response estimate needs). `zero_results` computes them
once per (seed, channels, ADC rate) by running the real zero
(gaugecore.zero, through Channel.start_zero) on a Bench of the same seed at
the Larkspur bell jar's base pressure; they reach the device the normal way,
as the stored configuration's "zero" items (gaugecore.device), which
`build` loads and applies at boot.
"""

import asyncio
import errno
import logging
import os
import shutil
import tempfile
import threading
import time

import gaugecore
from gaugecore import device as devmod
from gaugecore import tablefile
from gaugecore.assembly import CONTROL_PERIOD_MS, build
from gaugecore.catalogue import Catalogue
from gaugecore.channel import Channel
from gaugecore.controller import Controller
from gaugecore.faults import FaultMonitor
from gaugecore.service import Service
from gaugecore.store import Store

from tcgauge.sim import chamber
from tcgauge.sim.bench import Bench
from tcgauge.sim.faults import check_name
from tcgauge.sim.simtable import make_table

log = logging.getLogger(__name__)

PROFILE = "wren-demo"
BAUD = 115200
TX_BUFFER = 256  # bytes: a typical MicroPython UART transmit ring (invented for the demo)
MAX_LAG_S = 0.25
# ADC data rate: each conversion holds the loop for 1/rate (as a blocking read on the board
# does); 330 sps lets 2 channels sample at up to 50 Hz with current reversal.
ADC_SPS = 330
SERVICE_PERIOD_MS = 2
# Heater range the demo tube accepts, mA (invented for the demo Wren tube).
MIN_MA = 100.0
MAX_MA = 220.0
DEMO_TABLE = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(gaugecore.__file__))),
                          "tables", "demo_n2.json")

_table_cache = {}
_zero_cache = {}
# Vacuum zero of the stored set-up: the tube settles this long at base first (the
# heater's soft start and a few time constants of ~11 s), then the zero may take this long.
ZERO_SETTLE_S = 120.0
ZERO_TIMEOUT_S = 900.0


def table_name(gas):
    """Catalogue name of the simulated table for `gas`: 'demo_n2', 'demo_ar', ..."""
    return "demo_" + gas.lower()


def table_text(gas):
    """Table file text for the demo tube in `gas` (N2: the shipped demo table)."""
    if gas not in _table_cache:
        if gas == "N2":
            with open(DEMO_TABLE, "rb") as f:
                _table_cache[gas] = f.read()
        else:
            # same grid as the shipped demo table: 40 points, 0.02-1000 Pa, EMF referred to 0 C
            t = make_table(PROFILE, gas, points=40, p_min_pa=0.02, p_max_pa=1000.0, ref_c=0.0)
            _table_cache[gas] = tablefile.dumps(t).encode("utf-8")
    return _table_cache[gas]


def _limits(table):
    """The demo tube's limits for a channel reading `table` (invented heater range)."""
    return {"nominal_ma": table.heater_ma, "min_ma": MIN_MA, "max_ma": MAX_MA,
            "zero_emf_mv": table.points[0][0]}


def zero_results(seed=0, channels=2, adc_sps=ADC_SPS):
    """One ZeroResult dict per channel: a vacuum zero of the simulated tube at base.

    A Bench with the device's seed (so each channel has the same simulated
    electronics as the device's), static at the Larkspur bell jar's base
    pressure in N2, read through the demo table; each channel settles for
    ZERO_SETTLE_S, then runs gaugecore.zero (Channel.start_zero). Cached.
    RuntimeError if a zero is refused.
    """
    key = (seed, channels, adc_sps)
    if key in _zero_cache:
        return [dict(z) for z in _zero_cache[key]]
    table = tablefile.loads(table_text("N2"))
    bench = Bench(PROFILE, scenario=chamber.static(chamber.LARKSPUR.base_pressure_pa), seed=seed,
                  channels=channels, adc={"data_rate_sps": adc_sps})
    chans = [Channel(i, hw.tc, hw.cj, hw.heater, hw.relays, table, _limits(table),
                     heater_ma=table.heater_ma,
                     monitor=FaultMonitor(emf_rail_mv=hw.tc.full_scale_uv / 1000.0))
             for i, hw in enumerate(bench.channels)]
    ctl = Controller(chans, bench.clock)
    clock = bench.clock
    zeros = None
    while True:
        now = clock.ticks_ms()
        if zeros is None and now >= ZERO_SETTLE_S * 1000.0:
            zeros = [c.start_zero(now) for c in chans]
        if zeros is not None and all(z.state != "running" for z in zeros):
            break
        if now > (ZERO_SETTLE_S + ZERO_TIMEOUT_S) * 1000.0:
            raise RuntimeError("simulated vacuum zero did not finish")
        ctl.step(now)
        nxt = min(c.next_ms for c in chans)
        clock.sleep_ms(max(1, nxt - clock.ticks_ms()))
    for i, z in enumerate(zeros):
        if z.result is None:
            raise RuntimeError("simulated vacuum zero of channel %d refused: %s" % (i + 1, z.reason))
    _zero_cache[key] = [z.result.to_dict() for z in zeros]
    return [dict(z) for z in _zero_cache[key]]


def parse_fault(text):
    """'NAME@SECONDS[:CHANNEL]' -> (name, at_s, channel) with channel 1-based (default 1)."""
    name, sep, rest = text.partition("@")
    if not sep or not name:
        raise ValueError("fault %r: expected NAME@SECONDS[:CHANNEL]" % text)
    at, sep, ch = rest.partition(":")
    try:
        at_s = float(at)
        channel = int(ch) if sep else 1
    except ValueError:
        raise ValueError("fault %r: expected NAME@SECONDS[:CHANNEL]" % text) from None
    if not at_s >= 0.0:
        raise ValueError("fault %r: time must be >= 0 s" % text)
    check_name(name)
    return name, at_s, channel


class ByteRate:
    """Transmit pacing: a bucket of `buffer` bytes refilled at baud/10 bytes/s."""

    def __init__(self, baud, buffer=TX_BUFFER, clock=time.monotonic):
        self.bytes_per_s = None if baud is None else baud / 10.0
        self.buffer = buffer
        self._clock = clock
        self._tokens = float(buffer)
        self._last = clock()

    def allow(self, n):
        """How many of n bytes may go now (and take them)."""
        if self.bytes_per_s is None:
            return n
        now = self._clock()
        self._tokens = min(self.buffer, self._tokens + (now - self._last) * self.bytes_per_s)
        self._last = now
        k = min(n, int(self._tokens))
        return k

    def take(self, k):
        if self.bytes_per_s is not None:
            self._tokens -= k


class PtyPort:
    """The device end of a pseudo-terminal (gaugecore.service byte-stream interface).

    The slave is set raw (no echo, no line editing, no CR/LF mapping) so
    that pyserial and PyVISA open `path` like a board's USB serial port.
    The device keeps the slave open itself, so a host may close and reopen it.
    """

    def __init__(self, baud=BAUD):
        import termios
        import tty

        self.master, self._slave = os.openpty()
        tty.setraw(self._slave, termios.TCSANOW)
        attrs = termios.tcgetattr(self._slave)
        attrs[3] &= ~(termios.ECHO | termios.ICANON)
        speed = getattr(termios, "B%d" % baud, termios.B115200) if baud else termios.B115200
        attrs[4] = attrs[5] = speed
        termios.tcsetattr(self._slave, termios.TCSANOW, attrs)
        os.set_blocking(self.master, False)
        self.path = os.ttyname(self._slave)
        self.rate = ByteRate(baud)
        self.closed = False

    def read_available(self):
        try:
            return os.read(self.master, 4096)
        except (BlockingIOError, InterruptedError):
            return b""
        except OSError as exc:
            if exc.errno == errno.EIO:  # no process has the slave open
                return b""
            raise

    def write(self, data):
        k = self.rate.allow(len(data))
        if k <= 0:
            return 0
        try:
            n = os.write(self.master, data[:k])
        except (BlockingIOError, InterruptedError):
            return 0
        except OSError as exc:
            if exc.errno == errno.EIO:
                return 0
            raise
        self.rate.take(n)
        return n

    def close(self):
        if not self.closed:
            self.closed = True
            os.close(self.master)
            os.close(self._slave)


class PipePort:
    """An in-process link: device end (read_available/write) and host end.

    The host end keeps at most `host_buffer` bytes unread (like a serial
    driver's buffer); beyond that the device's writes are refused, and its
    service drops records as it would on a slow link.
    """

    def __init__(self, baud=BAUD, host_buffer=65536):
        self._cond = threading.Condition()
        self._to_device = bytearray()
        self._to_host = bytearray()
        self.host_buffer = host_buffer
        self.rate = ByteRate(baud)
        self.closed = False

    # device end
    def read_available(self):
        with self._cond:
            if not self._to_device:
                return b""
            data = bytes(self._to_device)
            self._to_device.clear()
            return data

    def write(self, data):
        with self._cond:
            if self.closed:
                return 0
            room = self.host_buffer - len(self._to_host)
            k = self.rate.allow(min(len(data), room))
            if k <= 0:
                return 0
            self._to_host += data[:k]
            self.rate.take(k)
            self._cond.notify_all()
            return k

    # host end
    def host_write(self, data):
        with self._cond:
            if self.closed:
                raise OSError("sim port is closed")
            self._to_device += data
        return len(data)

    def host_waiting(self):
        with self._cond:
            return len(self._to_host)

    def host_read(self, size, timeout_s=None):
        """Up to `size` bytes; waits until `size` arrived or timeout_s passed (None: forever)."""
        deadline = None if timeout_s is None else time.monotonic() + timeout_s
        with self._cond:
            while len(self._to_host) < size and not self.closed:
                if deadline is None:
                    self._cond.wait(0.1)
                    continue
                left = deadline - time.monotonic()
                if left <= 0:
                    break
                self._cond.wait(left)
            data = bytes(self._to_host[:size])
            del self._to_host[:size]
            return data

    def host_discard(self):
        with self._cond:
            self._to_host.clear()

    def close(self):
        with self._cond:
            self.closed = True
            self._cond.notify_all()


class VirtualDevice:
    """A simulated controller (see the module docstring).

    scenario: a name of tcgauge.sim.chamber.SCENARIOS or a Scenario. gas:
    the chamber's gas, and the table the channels start with. faults:
    'NAME@SECONDS[:CHANNEL]' strings or (name, at_s, channel) tuples,
    channels counted from 1. speed: simulated seconds per wall second.
    root: folder of the device's files; baud: emulated output rate (None:
    unlimited); adc_sps: the simulated ADC's data rate. zeroed: a fresh
    store (no configuration yet) starts with a vacuum zero per channel
    (`zero_results`), as an instrument set up before would.
    """

    def __init__(self, scenario="pumpdown", gas="N2", seed=0, speed=1.0, faults=(), channels=2,
                 root=None, baud=BAUD, adc_sps=ADC_SPS, zeroed=False):
        if not speed > 0:
            raise ValueError("speed must be > 0, not %r" % (speed,))
        sc = chamber.get_scenario(scenario)
        if gas != "N2":
            sc.set_gas(0.0, gas)
        self.speed = float(speed)
        self.baud = baud
        self.bench = Bench(PROFILE, scenario=sc, seed=seed, channels=channels,
                           adc={"data_rate_sps": adc_sps})
        for f in faults:
            name, at_s, ch = parse_fault(f) if isinstance(f, str) else tuple(f)
            if not 1 <= ch <= channels:
                raise ValueError("fault %s: channel %d not in 1..%d" % (name, ch, channels))
            self.bench.inject(name, ch - 1, at_s=at_s)
        self._own_root = root is None
        self.root = tempfile.mkdtemp(prefix="tcgauge-sim-") if root is None else root
        tables = os.path.join(self.root, "tables")
        os.makedirs(tables, exist_ok=True)
        for g in ("N2", gas):
            path = os.path.join(tables, table_name(g) + ".json")
            if not os.path.exists(path):
                with open(path, "wb") as f:
                    f.write(table_text(g))
        first = tablefile.loads(table_text(gas))
        limits = []
        monitor = []
        for hw in self.bench.channels:
            limits.append(_limits(first))
            monitor.append({"emf_rail_mv": hw.tc.full_scale_uv / 1000.0})
        store = Store(os.path.join(self.root, "store"))
        if zeroed:
            self._store_zero(store, seed, channels, adc_sps, table_name(gas), first.heater_ma)
        self.device = build(self.bench.channels, self.bench.clock, Catalogue(tables), store, limits,
                            serial="SIM%04d" % (seed % 10000), default_table=table_name(gas),
                            tc_type=first.tc_type, monitor=monitor, sleep_ms=self._sleep_ms)
        self.controller = self.device.controller
        self.service = None
        self.port = None
        self.lag_resets = 0
        self._thread = None
        self._loop = None
        self._t0 = None
        self._error = None

    def _store_zero(self, store, seed, channels, adc_sps, table, heater_ma):
        """Write the set-up a zeroed instrument keeps: the default configuration
        with each channel's zero result and the heater current it found (as
        gaugecore.device stores a finished zero). A store that already holds a
        configuration is left as it is."""
        if os.path.exists(store.paths("config")[0]):
            return
        n_relays = sum(len(hw.relays) for hw in self.bench.channels)
        cfg = devmod.default_config(channels, n_relays, table, heater_ma)
        zeros = zero_results(seed, channels, adc_sps)
        cfg["zero"] = zeros
        cfg["heater_ma"] = [z["heater_ma"] for z in zeros]
        store.save_config(cfg)

    # ---------------------------------------------------------------- pacing
    async def _sleep_ms(self, ms):
        clock = self.bench.clock
        clock.sleep_ms(ms)
        delay = self._t0 + clock.time_s / self.speed - time.monotonic()
        if delay < -MAX_LAG_S:
            self._t0 += -delay - MAX_LAG_S
            self.lag_resets += 1
            delay = 0.0
        await asyncio.sleep(delay if delay > 0 else 0)

    # ---------------------------------------------------------------- serving
    def serve_pty(self):
        """Start on a new pseudo-terminal; returns its path (/dev/pts/N)."""
        self.start(PtyPort(self.baud))
        return self.port.path

    def connect(self):
        """Start on an in-process PipePort and return it (host end for sim://)."""
        self.start(PipePort(self.baud))
        return self.port

    def start(self, port):
        """Run the device on `port` (read_available/write) in a thread of its own."""
        if self._thread is not None:
            raise RuntimeError("virtual device already running")
        self.port = port
        self.service = Service(port, self.device)
        self._ready = threading.Event()
        self._thread = threading.Thread(target=self._main, name="tcgauge-virtual-device", daemon=True)
        self._thread.start()
        if not self._ready.wait(10.0):
            raise RuntimeError("virtual device did not start")

    def _main(self):
        try:
            asyncio.run(self._run())
        except BaseException as exc:  # reported by close(); the thread must not die silently
            self._error = exc
            log.exception("virtual device stopped")
        finally:
            self._ready.set()

    async def _run(self):
        self._loop = asyncio.get_running_loop()
        self._t0 = time.monotonic() - self.bench.clock.time_s / self.speed
        ctl = self.controller.run(CONTROL_PERIOD_MS)
        svc = self.service.run(SERVICE_PERIOD_MS)
        self._ready.set()
        await asyncio.gather(ctl, svc)

    def _halt(self):
        self.controller.stop()
        self.service.stop()

    @property
    def running(self):
        return self._thread is not None and self._thread.is_alive()

    def close(self, timeout_s=5.0):
        """Stop the thread, close the port, remove the temporary root."""
        if self._thread is not None:
            loop = self._loop
            if loop is not None and self._thread.is_alive():
                try:
                    loop.call_soon_threadsafe(self._halt)
                except RuntimeError:
                    pass  # loop already closed
            self._thread.join(timeout_s)
            if self._thread.is_alive():
                raise RuntimeError("virtual device thread did not stop within %.1f s" % timeout_s)
            self._thread = None
        if self.port is not None:
            self.port.close()
        if self._own_root and os.path.isdir(self.root):
            shutil.rmtree(self.root, ignore_errors=True)
        if self._error is not None:
            err, self._error = self._error, None
            raise RuntimeError("virtual device failed: %r" % (err,))

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
