"""tcgauge board entry point: board.json -> board -> tables -> controller -> protocol.

Boot, in order (`boot()`; any step that fails leaves a message, see `main()`):
  1. read board.json (`read_config`): which board, which chips, channel
     count, the table per channel, the tube's heater limits;
  2. import boards.<board> and `build(config)`: buses and drivers;
  3. tables (gaugecore.store): each channel's slot "chN" as the store's
     `boot` finds it (active, an interrupted install finished, or the
     previous good file); an empty slot gets the catalogue table board.json
     names (tables/<name>.json); a channel with no valid table stops the boot;
  4. channels, controller (gaugecore.channel, gaugecore.controller) and the
     device facade with its stored configuration (gaugecore.device);
  5. the SCPI dispatcher (gaugecore.scpi) on the USB serial, and asyncio:
     the controller's loop, the serial service, the display and LED.

Under CPython, tests put a fake `machine` in sys.modules, pass a fake clock
and drive `App.step()`; nothing here needs the board.
"""

import json
import sys

CONFIG_PATH = "board.json"
BOARDS = ("pico", "pico_w", "esp32")
LIMIT_KEYS = ("nominal_ma", "min_ma", "max_ma", "zero_emf_mv")
DISPLAY_MS = 1000


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
        v = tube.get(key)
        if not isinstance(v, (int, float)) or isinstance(v, bool):
            raise ValueError("board.json: tube.%s must be a number" % key)
    return cfg


def board_module(name):
    """The module boards.<name>."""
    if name not in BOARDS:
        raise ValueError("board.json: board must be one of %s, not %r" % (", ".join(BOARDS), name))
    pkg = __import__("boards." + name)
    return getattr(pkg, name)


def boot_tables(store, catalogue, names):
    """One Table per channel -> (tables, notes). OSError if a channel has none."""
    tables = []
    notes = []
    for i in range(len(names)):
        slot = "ch%d" % (i + 1)
        table, fault = store.boot(slot)
        if fault:
            notes.append(fault)
        if table is None:
            try:
                table = store.install(slot, catalogue.text(names[i]))[0]
                notes.append("table %s: installed %s from the catalogue" % (slot, names[i]))
            except (ValueError, OSError) as exc:
                raise OSError("channel %d has no usable table: %s" % (i + 1, _text(exc)))
        tables.append(table)
    return tables, notes


def _text(exc):
    if exc.args and isinstance(exc.args[0], str):
        return exc.args[0]
    return type(exc).__name__


class App:
    """The running instrument: hardware, channels, controller, device, dispatcher."""

    def __init__(self, config, hw, channels, controller, device, dispatcher, notes):
        self.config = config
        self.hw = hw
        self.channels = channels
        self.controller = controller
        self.device = device
        self.dispatcher = dispatcher
        self.notes = notes
        self.out = []  # stream records waiting for the port
        self.records = 0  # stream records of the device, all channels together
        self.sleep_ms = None  # coroutine function(ms) of the loops; None: asyncio's
        self._display_due = None

    def on_reading(self, ch):
        """Controller callback: the device's bookkeeping, then a stream record."""
        dev = self.device
        dev.on_reading(ch)
        if dev.streaming:
            from gaugecore import record

            self.records += 1
            self.out.append(record.encode(self.records, ch.time_ms, ch.index + 1, ch.emf_mv, ch.cj_c,
                                          ch.pressure_pa, ch.state, ch.fault))

    def step(self):
        """One controller step at the clock's now; display refresh when due."""
        now = self.controller.now_ms()
        n = self.controller.step(now)
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

    def handle(self, data):
        """Bytes from the port -> reply lines (stream records first)."""
        replies = self.dispatcher.feed(data)
        out = self.out + replies
        self.out = []
        return out


def boot(config_path=CONFIG_PATH, root="", clock=None, sleep_ms=None):
    """Build everything from board.json (see the module docstring) -> App.

    clock: the board's clock (default MicroPython's `time`); sleep_ms: the
    coroutine function the loops await (default asyncio's), for tests."""
    from gaugecore import device as devmod
    from gaugecore.catalogue import Catalogue
    from gaugecore.channel import Channel
    from gaugecore.commands import E_EXECUTION
    from gaugecore.controller import Controller
    from gaugecore.scpi import Dispatcher
    from gaugecore.store import Store

    config = read_config(root + config_path)
    hw = board_module(config["board"]).build(config, clock)
    n = len(hw["channels"])
    names = config["tables"][:n]
    store = Store(root + "store")
    catalogue = Catalogue(root + "tables")
    tables, notes = boot_tables(store, catalogue, names)
    notes = hw["notes"] + notes
    tube = config["tube"]
    limits = []
    channels = []
    relays = []
    for k in range(n):
        h = hw["channels"][k]
        lim = {}
        for key in LIMIT_KEYS:
            lim[key] = float(tube[key])
        limits.append(lim)
        channels.append(Channel(k, h["tc"], h["cj"], h["heater"], h["relays"], tables[k], lim,
                                settle_ms=config.get("settle_ms", 5)))
        relays += h["relays"]
    app = App(config, hw, channels, None, None, None, notes)
    app.sleep_ms = sleep_ms
    controller = Controller(channels, hw["clock"], sleep_ms=sleep_ms, on_reading=app.on_reading)
    defaults = devmod.default_config(n, len(relays), names[0], tube["nominal_ma"])
    defaults["tables"] = list(names)
    defaults["rate_hz"] = float(config.get("rate_hz", 2.0))
    cfg, cfg_notes = devmod.load(store, n, len(relays), defaults)
    device = devmod.Device(channels, controller, store, catalogue, relays, limits, cfg, defaults,
                           serial=config.get("serial", "0"), notes=notes + cfg_notes)
    dispatcher = Dispatcher(device, device.ident(), channels=n, setpoints=len(relays))
    for text in device.notes:
        dispatcher.push_error(E_EXECUTION, text)
    device.errors = dispatcher
    app.controller = controller
    app.device = device
    app.dispatcher = dispatcher
    return app


class UsbPort:
    """The USB serial (the REPL's stdin/stdout) without blocking: poll, then read."""

    def __init__(self):
        import select

        self._in = sys.stdin.buffer if hasattr(sys.stdin, "buffer") else sys.stdin
        self._out = sys.stdout
        self._poll = select.poll()
        self._poll.register(sys.stdin, select.POLLIN)

    def read(self):
        """Bytes waiting on the port (b"" when none)."""
        out = b""
        while self._poll.poll(0):
            c = self._in.read(1)
            if not c:
                break
            out += c if isinstance(c, bytes) else c.encode()
            if len(out) >= 64:
                break
        return out

    def write_line(self, text):
        """One line out, newline-terminated."""
        self._out.write(text + "\n")


async def _sleep_ms(ms):
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    if hasattr(asyncio, "sleep_ms"):
        await asyncio.sleep_ms(ms)
    else:
        await asyncio.sleep(ms * 0.001)


async def serve(app, port, period_ms=10):
    """Answer the protocol on `port` and send stream records, forever."""
    sleep_ms = app.sleep_ms or _sleep_ms
    while True:
        data = port.read()
        for line in app.handle(data):
            port.write_line(line)
        app.refresh(app.controller.now_ms())
        await sleep_ms(period_ms)


async def run(app, port, period_ms=10, cycles=None):
    """The serial service beside the controller's loop (`cycles` of it; None: forever)."""
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    task = asyncio.create_task(serve(app, port))
    await app.controller.run(period_ms, cycles)
    task.cancel()


def main():
    """Boot and run until reset; a failed boot prints why and returns None
    (the REPL stays usable, so board.json or a table can be fixed with mpremote)."""
    try:
        import asyncio
    except ImportError:
        import uasyncio as asyncio
    try:
        app = boot()
    except (ValueError, OSError, ImportError) as exc:
        print("tcgauge: boot failed: %s" % _text(exc))
        return None
    asyncio.run(run(app, UsbPort()))
    return app


if __name__ == "__main__":
    main()
