"""tcgauge board entry point: board.json -> board -> gaugecore.assembly.build -> Service.

Boot, in order (`boot()`; a step that fails raises, `main()` prints why):
  1. read board.json (`read_config`): which board, which chips, channel
     count, the table per channel, the tube's heater limits, sample rate;
  2. import boards.<board> and `build(config, clock)`: buses and drivers;
     every DAC that answers is switched off first, a chip that does not
     answer stops the boot with its name (boards/common.py);
  3. the board's fastest sample rate (`rate_max_hz`, from its converters'
     conversion times); a board.json rate above it is capped, with a note;
  4. `gaugecore.assembly.build`: the one construction path, the virtual
     device (tcgauge.sim.device) uses it too: each channel's table from the
     store (slot "chN") or the catalogue table board.json names, channels,
     controller, the Device facade with its stored configuration. A channel
     with no usable table stops the boot, after the heaters are switched off;
  5. `gaugecore.service.Service` on the port (the USB serial: `UsbPort`):
     protocol replies and stream records; the boot notes wait in its error
     queue (SYST:ERR?).
`run()` is the running instrument under asyncio: the service task, the
display/LED task and the controller's loop at assembly.CONTROL_PERIOD_MS.

Tests (CPython and MicroPython) pass a fake `machine`, clock and port and drive `App.step()`.
"""

import json
import sys

from gaugecore import assembly
from gaugecore.device import RATE_MAX_HZ, RATE_MIN_HZ

CONFIG_PATH = "board.json"
BOARDS = ("pico", "pico_w", "esp32")
LIMIT_KEYS = ("nominal_ma", "min_ma", "max_ma", "zero_emf_mv")
DISPLAY_MS = 1000
SERVICE_PERIOD_MS = 5
SETTLE_MS = 5  # after each current reversal (gaugecore.channel's default)
READS_PER_SAMPLE = 2  # "reverse" sampling, one +I/-I pair (gaugecore.sampler)
# Time beyond the thermocouple conversions and settle windows (heater read-back,
# display, the interpreter): an estimate, to be measured on each real board.
RATE_HEADROOM = 1.25


def _number(cfg, key, where="board.json: "):
    v = cfg.get(key)
    if not isinstance(v, (int, float)) or isinstance(v, bool):
        raise ValueError("%s%s must be a number" % (where, key))
    return v


def read_config(path=CONFIG_PATH):
    """board.json as a dict, checked; ValueError (or OSError if unreadable) names the problem."""
    with open(path) as f:
        text = f.read()
    try:
        cfg = json.loads(text)
    except ValueError:
        raise ValueError("board.json: not valid JSON")
    if not isinstance(cfg, dict):
        raise ValueError("board.json: expected a JSON object")
    if cfg.get("board") not in BOARDS:
        raise ValueError("board.json: board must be one of %s, not %r" % (", ".join(BOARDS), cfg.get("board")))
    n = cfg.get("channels", 2)
    tables = cfg.get("tables")
    if not isinstance(tables, list) or len(tables) < n or not all(isinstance(t, str) for t in tables):
        raise ValueError("board.json: tables must list one table name per channel")
    tube = cfg.get("tube")
    if not isinstance(tube, dict):
        raise ValueError("board.json: tube must give %s" % ", ".join(LIMIT_KEYS))
    for key in LIMIT_KEYS:
        _number(tube, key, "board.json: tube.")
    for key, lo, hi in (("rate_hz", RATE_MIN_HZ, RATE_MAX_HZ), ("settle_ms", 0, 100)):
        if key in cfg and not lo <= _number(cfg, key) <= hi:
            raise ValueError("board.json: %s must be in %g..%g, not %r" % (key, lo, hi, cfg[key]))
    return cfg


def board_module(name):
    """The module boards.<name>."""
    if name not in BOARDS:
        raise ValueError("board.json: board must be one of %s, not %r" % (", ".join(BOARDS), name))
    pkg = __import__("boards." + name)
    return getattr(pkg, name)


def rate_max_hz(parts, settle_ms=SETTLE_MS):
    """Fastest sample rate, Hz (0.1 Hz steps), the board's converters sustain on every channel.

    A sample of one channel is READS_PER_SAMPLE blocking conversions of its
    ADC (`conversion_ms`), plus TcInput's open check every
    `open_check_every` reads, and one settle window per read; the channels
    take turns on one loop, and RATE_HEADROOM covers the rest.
    """
    ms = 0.0
    for p in parts:
        tc = p["tc"]
        every = getattr(tc, "open_check_every", 0)
        n = READS_PER_SAMPLE * (1.0 + (1.0 / every if every else 0.0))
        ms += n * tc.adc.conversion_ms + READS_PER_SAMPLE * settle_ms
    hz = int(10000.0 / (RATE_HEADROOM * ms)) / 10.0
    if hz > RATE_MAX_HZ:
        return RATE_MAX_HZ
    return hz if hz > RATE_MIN_HZ else RATE_MIN_HZ


def _text(exc):
    if exc.args and isinstance(exc.args[0], str):
        return exc.args[0]
    return type(exc).__name__


def shutdown(hw):
    """Every heater off and every relay released (a stopped gauge holds nothing on)."""
    for p in hw["channels"]:
        try:
            p["heater"].off()
        except OSError:
            pass  # the other channels still go off
        for r in p["relays"]:
            r.set(False)


class App:
    """The running instrument: the board's hardware, the Device and its Service."""

    def __init__(self, config, hw, device, service, notes, sleep_ms=None):
        self.config = config
        self.hw = hw
        self.device = device
        self.service = service
        self.controller = device.controller
        self.channels = device.channels
        self.notes = notes  # boot notes (also queued as errors for SYST:ERR?)
        self.sleep_ms = sleep_ms  # coroutine function(ms) of the loops; None: asyncio's
        self.running = False
        self._display_due = None

    def step(self):
        """One controller step at the clock's now, one service poll, the display when due."""
        now = self.controller.now_ms()
        n = self.controller.step(now)
        self.service.poll()
        self.refresh(now)
        return n

    def refresh(self, now_ms):
        """Redraw the display and toggle the LED once a second."""
        if self._display_due is not None and now_ms - self._display_due < 0:
            return
        self._display_due = now_ms + DISPLAY_MS
        disp = self.hw["display"]
        if disp is not None:
            disp.unit = self.device.unit()
            try:
                disp.update(self.channels)
            except OSError:
                pass  # a display that stops answering must not stop the gauge
        led = self.hw["led"]
        led.value(0 if led.value() else 1)

    async def show(self, period_ms=DISPLAY_MS):
        """The display/LED task: refresh every period_ms while running."""
        sleep_ms = self.sleep_ms or _sleep_ms
        self.running = True
        while self.running:
            self.refresh(self.controller.now_ms())
            await sleep_ms(period_ms)


def boot(config_path=CONFIG_PATH, root="", clock=None, sleep_ms=None, port=None):
    """Build everything from board.json (see the module docstring) -> App.

    clock: the board's clock (default MicroPython's `time`); sleep_ms: the
    coroutine function the loops await (default asyncio's), for tests;
    port: the Service's byte stream (default UsbPort())."""
    from gaugecore.catalogue import Catalogue
    from gaugecore.service import Service
    from gaugecore.store import Store

    config = read_config(root + config_path)
    hw = board_module(config["board"]).build(config, clock)
    try:
        parts = hw["channels"]
        n = len(parts)
        notes = list(hw["notes"])
        settle_ms = int(config.get("settle_ms", SETTLE_MS))
        rate_max = rate_max_hz(parts, settle_ms)
        rate = float(config.get("rate_hz", 2.0))
        if rate > rate_max:
            notes.append("board.json: rate_hz %.6g Hz is above this board's %.6g Hz, using %.6g Hz"
                         % (rate, rate_max, rate_max))
            rate = rate_max
        tube = config["tube"]
        limits = []
        monitor = []
        for p in parts:
            lim = {}
            for key in LIMIT_KEYS:
                lim[key] = float(tube[key])
            limits.append(lim)
            rail_uv = getattr(p["tc"], "rail_uv", None)  # TcInput: an open input reads full scale
            monitor.append({} if rail_uv is None else {"emf_rail_mv": rail_uv / 1000.0})
        dev = assembly.build(parts, hw["clock"], Catalogue(root + "tables"), Store(root + "store"), limits,
                             serial=config.get("serial", "0"), default_table=config["tables"][:n],
                             monitor=monitor, channel_options=[{"settle_ms": settle_ms}] * n,
                             sleep_ms=sleep_ms, rate_hz=rate, rate_max_hz=rate_max)
    except (ValueError, OSError):
        shutdown(hw)
        raise
    notes += dev.notes
    dev.notes = list(notes)  # the Service queues them as errors
    svc = Service(UsbPort() if port is None else port, dev, sleep_ms=sleep_ms)
    return App(config, hw, dev, svc, notes, sleep_ms)


class UsbPort:
    """The USB serial (the REPL's stdin/stdout) as a gaugecore.service port.

    `read_available()` takes only what `select.poll` says is there (up to
    `chunk` bytes a call), so it never blocks; `write(data)` hands the bytes
    to stdout's binary stream (no newline translation)."""

    def __init__(self, stdin=None, stdout=None, chunk=64):
        import select

        stdin = sys.stdin if stdin is None else stdin
        stdout = sys.stdout if stdout is None else stdout
        src = getattr(stdin, "buffer", stdin)
        self._in = getattr(src, "raw", src)  # CPython: below the read buffer, which poll cannot see
        self._out = getattr(stdout, "buffer", stdout)
        self._flush = getattr(self._out, "flush", None)
        self._poll = select.poll()
        self._poll.register(stdin, select.POLLIN)
        self._buf = bytearray(chunk)

    def read_available(self):
        """Bytes waiting on the port (b"" when none)."""
        buf = self._buf
        n = 0
        while n < len(buf) and self._poll.poll(0):
            c = self._in.read(1)
            if not c:
                break
            buf[n] = c[0] if isinstance(c, (bytes, bytearray)) else ord(c)
            n += 1
        return bytes(buf[:n]) if n else b""

    def write(self, data):
        """Bytes taken (None: all of them)."""
        n = self._out.write(data)
        if self._flush is not None:
            self._flush()
        return n


async def _sleep_ms(ms):
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    if hasattr(asyncio, "sleep_ms"):
        await asyncio.sleep_ms(ms)
    else:
        await asyncio.sleep(ms * 0.001)


async def run(app, cycles=None):
    """Service and display tasks beside the controller's loop (`cycles` of it; None: forever)."""
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    asyncio.create_task(app.service.run(SERVICE_PERIOD_MS))
    asyncio.create_task(app.show())
    await app.controller.run(assembly.CONTROL_PERIOD_MS, cycles)
    app.service.stop()
    app.running = False


def main(root="", clock=None, port=None, sleep_ms=None, cycles=None):
    """Boot and run until reset; a failed boot prints why and returns None
    (the REPL stays usable, so board.json or a table can be fixed with
    mpremote). When the loop ends, for whatever reason, heaters go off."""
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    try:
        app = boot(root=root, clock=clock, sleep_ms=sleep_ms, port=port)
    except (ValueError, OSError, ImportError) as exc:
        print("tcgauge: boot failed: %s" % _text(exc))
        return None
    try:
        asyncio.run(run(app, cycles))
    finally:
        shutdown(app.hw)
    return app


if __name__ == "__main__":
    main()
