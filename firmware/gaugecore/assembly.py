"""Assemble the instrument: hardware objects in, a running Device out.

The board's main.py and the simulator's virtual device both call `build`,
so there is one construction path:

    dev = build(hardware, clock, Catalogue("/tables"), Store("/store"), limits)
    svc = Service(stream, dev)            # gaugecore.service
    asyncio.create_task(svc.run()); await dev.controller.run(CONTROL_PERIOD_MS)

hardware: one object (or dict) per channel with `tc` (read_uv), `cj`
(read_c), `heater` (set_ma, read_ma, read_v, off, set_polarity) and
`relays` (list of relays with set(on)); a tcgauge.sim.bench channel is one
as it stands, so is a board module's dict of parts.
limits: per channel the tube's {"nominal_ma", "min_ma", "max_ma",
"zero_emf_mv"} (gaugecore.channel). relays: one relay per setpoint
(default: every relay of every channel, channel 1's first).

A channel's table at start-up: the one in the store's slot "chN" (the
store falls back to the previous good file by itself); an empty slot gets
the configured catalogue table installed (else the default one). A note
says which fallback was taken; the notes go to the error queue.
"""

from gaugecore import device as D
from gaugecore.channel import Channel
from gaugecore.controller import Controller
from gaugecore.faults import FaultMonitor

CONTROL_PERIOD_MS = 5  # controller cycle: settle windows and heater ticks are multiples of it


def _boot_table(catalogue, store, n, name, default_name, tc_type, notes):
    """(table, name) for channel n; OSError when there is none at all.

    The store's slot "chN" first (what the channel used last, with the
    store's own fallback to the previous good file); an empty slot gets the
    configured catalogue table (else the default one) installed.
    """
    slot = "ch%d" % n
    start = len(notes)
    table, fault = store.boot(slot, tc_type)
    if table is not None:
        if fault:
            notes.append(fault)
        return table, name
    if fault and not fault.endswith("no table installed"):  # an empty slot is a first boot
        notes.append(fault)
    names = catalogue.names()
    for pick in (name, default_name):
        if pick in names:
            try:
                table = store.install(slot, catalogue.text(pick), tc_type)[0]
            except (ValueError, OSError) as exc:
                notes.append("table %s: %s" % (pick, D._text(exc)))
                continue
            if pick != name:
                notes.append("channel %d: table %s not found, using %s" % (n, name, pick))
            return table, pick
    why = notes[-1] if len(notes) > start else "no table named %s in the catalogue" % name
    raise OSError("channel %d: no usable table on the device (%s)" % (n, why))


def _part(hw, name):
    """hw.name, or hw[name] for a board's dict of parts."""
    if isinstance(hw, dict):
        return hw[name]
    return getattr(hw, name)


def build(hardware, clock, catalogue, store, limits, serial="0", relays=None, default_table=None,
          tc_type="K", monitor=None, channel_options=None, sleep_ms=None, rate_hz=None,
          rate_max_hz=None):
    """Channels, controller and facade from the hardware -> gaugecore.device.Device.

    monitor: per channel keyword dict for FaultMonitor (the tube's
    thresholds, the ADC's rail); channel_options: per channel keyword dict
    for Channel (settle_ms, mode, average_n, ...); sleep_ms: the
    controller's sleep coroutine (default asyncio's). default_table: a
    catalogue name, or a list with one per channel (default: the first
    name); rate_hz: the default sample rate (else device.DEFAULT_RATE_HZ, or
    rate_max_hz if that is lower); rate_max_hz: the fastest rate the hardware
    sustains (a board's converter time; default device.RATE_MAX_HZ).
    """
    n = len(hardware)
    if n < 1:
        raise ValueError("build needs at least one channel")
    if len(limits) != n:
        raise ValueError("build: %d limits for %d channels" % (len(limits), n))
    if relays is None:
        relays = []
        for hw in hardware:
            relays += list(_part(hw, "relays"))
    if default_table is None:
        names = catalogue.names()
        if not names:
            raise OSError("no table files in %s" % catalogue.folder)
        default_table = names[0]
    per_channel = default_table if isinstance(default_table, (list, tuple)) else [default_table] * n
    if len(per_channel) < n:
        raise ValueError("build: %d default tables for %d channels" % (len(per_channel), n))
    defaults = D.default_config(n, len(relays), per_channel[0], limits[0]["nominal_ma"])
    for i in range(n):
        defaults["heater_ma"][i] = float(limits[i]["nominal_ma"])
        defaults["tables"][i] = per_channel[i]
    rate_max = D.RATE_MAX_HZ if rate_max_hz is None else float(rate_max_hz)
    if rate_hz is not None:
        defaults["rate_hz"] = float(rate_hz)
    elif defaults["rate_hz"] > rate_max:
        defaults["rate_hz"] = rate_max
    cfg, notes = D.load(store, n, len(relays), defaults)
    channels = []
    for i in range(n):
        hw = hardware[i]
        table, name = _boot_table(catalogue, store, i + 1, cfg["tables"][i], per_channel[i],
                                  tc_type, notes)
        cfg["tables"][i] = name
        mon = FaultMonitor(**(monitor[i] if monitor else {}))
        opts = channel_options[i] if channel_options else {}
        channels.append(Channel(i, _part(hw, "tc"), _part(hw, "cj"), _part(hw, "heater"),
                                _part(hw, "relays"), table, limits[i],
                                heater_ma=limits[i]["nominal_ma"], monitor=mon, **opts))
    for ch in channels:  # a table without the wall model: say which fallback the channel took
        if ch.compensation_note:
            notes.append("channel %d: %s" % (ch.index + 1, ch.compensation_note))
    ctl = Controller(channels, clock, sleep_ms=sleep_ms)
    return D.Device(channels, ctl, store, catalogue, relays, limits, cfg, defaults, serial, notes,
                    rate_max_hz=rate_max)
