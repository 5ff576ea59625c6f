"""Opening a controller's port by name: a device path, a pyserial URL, or `sim://...`.

`PortOpener(name)` is a callable that opens the port each time it is called,
as tcgauge.acquire.Acquirer needs to reopen a lost link. For a `sim://`
port (an in-process VirtualDevice, tcgauge.urlhandler.protocol_sim) it also
offers the simulator's true pressure at a record's device time
(`true_pressure(rec)`), which the protocol cannot carry; for any other port
that is None. Importing tcgauge.link registers the `sim://` scheme.
"""

import tcgauge.link  # noqa: F401  (registers the sim:// URL handler)

BAUD = 115200
READ_TIMEOUT_S = 0.05


def true_pressure_hook(port):
    """A callable(rec) -> true pressure (Pa) at the record's device time, or None.

    For a `sim://` port, whose `device` is the in-process VirtualDevice: its
    Bench's scenario gives the chamber pressure as a function of simulated
    time, and the device clock (record t_ms) is that simulated time.
    """
    bench = getattr(getattr(port, "device", None), "bench", None)
    scenarios = getattr(bench, "scenarios", None)
    if not scenarios:
        return None

    def true_pa(rec):
        if not 1 <= rec.ch <= len(scenarios):
            return None
        return scenarios[rec.ch - 1].pressure_pa(rec.t_ms / 1000.0)

    return true_pa


class PortOpener:
    """Opens `name` with pyserial on each call; see the module docstring."""

    def __init__(self, name, baud=BAUD):
        self.name = name
        self.baud = baud
        self._hook = None

    @property
    def is_simulator(self):
        """True for a sim:// port."""
        return self.name.lower().startswith("sim://")

    @property
    def source(self):
        """What the log calls the source: 'device' or 'simulator <url>'."""
        return "simulator " + self.name if self.is_simulator else "device"

    def __call__(self):
        import serial

        port = serial.serial_for_url(self.name, self.baud, timeout=READ_TIMEOUT_S)
        self._hook = true_pressure_hook(port)
        return port

    def true_pressure(self, rec):
        """True pressure (Pa) of an in-process simulator at the record's time, else None."""
        return None if self._hook is None else self._hook(rec)
