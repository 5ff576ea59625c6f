"""pyserial handler for `sim://`: a tcgauge.sim.device.VirtualDevice in this process.

URL: sim://[?option=value&...] with the options of VirtualDevice:
  scenario   built-in scenario name (default pumpdown)
  gas        chamber gas and starting table (default N2)
  seed       integer (default 0)
  speed      simulated seconds per wall second (default 1)
  channels   number of channels (default 2)
  fault      NAME@SECONDS[:CHANNEL], repeatable
  baud       emulated byte rate of the device's output, 8N1 (default 115200;
             0 = unlimited). pyserial's own `baudrate` is ignored, as loop:// does.
  root       folder for the device's files (default: a temporary one)
  zeroed     1: the device starts with a stored vacuum zero per channel, as
             an instrument set up before would (default 0: never zeroed)
Closing the port stops the device.
"""

import urllib.parse

from serial.serialutil import PortNotOpenError, SerialBase, SerialException, to_bytes

_OPTIONS = ("scenario", "gas", "seed", "speed", "channels", "fault", "baud", "root", "zeroed")


def parse_url(url):
    """'sim://?scenario=steps&speed=5' -> VirtualDevice keyword arguments."""
    parts = urllib.parse.urlsplit(url)
    if parts.scheme.lower() != "sim":
        raise SerialException("expected a sim:// URL, got %r" % url)
    if parts.netloc or parts.path not in ("", "/"):
        raise SerialException("sim:// takes only ?options, got %r" % url)
    kw = {}
    faults = []
    for key, values in urllib.parse.parse_qs(parts.query, keep_blank_values=True).items():
        if key not in _OPTIONS:
            raise SerialException("sim://: unknown option %r (known: %s)" % (key, ", ".join(_OPTIONS)))
        if key == "fault":
            faults.extend(values)
            continue
        if len(values) != 1:
            raise SerialException("sim://: option %r given twice" % key)
        value = values[0]
        try:
            if key in ("seed", "channels"):
                kw[key] = int(value)
            elif key == "speed":
                kw[key] = float(value)
            elif key == "baud":
                kw[key] = int(value) or None
            elif key == "zeroed":
                if value not in ("0", "1"):
                    raise ValueError(value)
                kw[key] = value == "1"
            else:
                kw[key] = value
        except ValueError:
            raise SerialException("sim://: option %s=%r is not a number" % (key, value)) from None
    if faults:
        kw["faults"] = tuple(faults)
    return kw


class Serial(SerialBase):
    """A serial port whose far end is a virtual device."""

    def __init__(self, *args, **kwargs):
        self.device = None
        self._pipe = None
        super().__init__(*args, **kwargs)

    def open(self):
        if self.is_open:
            raise SerialException("Port is already open.")
        if self._port is None:
            raise SerialException("Port must be configured before it can be used.")
        from tcgauge.sim.device import VirtualDevice

        options = parse_url(self._port)
        try:
            self.device = VirtualDevice(**options)
        except (ValueError, OSError) as exc:
            raise SerialException("sim://: %s" % exc) from exc
        self._pipe = self.device.connect()
        self.is_open = True

    def close(self):
        if self.is_open:
            self.is_open = False
            dev, self.device = self.device, None
            if dev is not None:
                dev.close()
        super().close()

    def _reconfigure_port(self, *args, **kwargs):
        pass  # nothing to configure: the link has no line settings

    def from_url(self, url):
        return parse_url(url)

    @property
    def in_waiting(self):
        if not self.is_open:
            raise PortNotOpenError()
        return self._pipe.host_waiting()

    def read(self, size=1):
        if not self.is_open:
            raise PortNotOpenError()
        if size <= 0:
            return b""
        return self._pipe.host_read(size, self._timeout)

    def write(self, data):
        if not self.is_open:
            raise PortNotOpenError()
        data = to_bytes(data)
        return self._pipe.host_write(data)

    def flush(self):
        pass  # writes reach the device at once (io.RawIOBase.close calls this too)

    def reset_input_buffer(self):
        if not self.is_open:
            raise PortNotOpenError()
        self._pipe.host_discard()

    def reset_output_buffer(self):
        if not self.is_open:
            raise PortNotOpenError()

    @property
    def out_waiting(self):
        return 0

    def _update_break_state(self):
        pass

    def _update_rts_state(self):
        pass

    def _update_dtr_state(self):
        pass

    @property
    def cts(self):
        return True

    @property
    def dsr(self):
        return True

    @property
    def ri(self):
        return False

    @property
    def cd(self):
        return True


__all__ = ["Serial", "parse_url"]
