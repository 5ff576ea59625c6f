"""A scripted controller for the acquisition tests: the real SCPI dispatcher
over the fake facade (tests/core/fake_facade.py), plus a script of what the
port delivers while streaming.

Script items, one per port read once streaming is on:
  str/bytes  a line (a newline is added): a record, or anything else
  Exception  raised by that read (a pulled cable raises OSError)
  callable   called (e.g. to inspect the database mid-run); the read returns nothing
  None       the read returns nothing (a quiet moment)
Set `hung` to make it stop answering (a device that hangs with the port open).
Values are invented for the demo (the 'Wren' tube `wren-demo`, the
'Larkspur bell jar').
"""

import importlib.util
import os

from gaugecore import commands as C
from gaugecore import record, scpi

_HERE = os.path.dirname(__file__)
_spec = importlib.util.spec_from_file_location(
    "fake_facade", os.path.join(_HERE, "..", "core", "fake_facade.py"))
fake_facade = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fake_facade)


def rec_line(seq, t_ms, ch, emf_mv, t_c, pressure_pa, state="ok", fault=None):
    """One encoded record line (gaugecore.record.encode)."""
    return record.encode(seq, t_ms, ch, emf_mv, t_c, pressure_pa, state, fault)


class StreamDevice:
    """A port: answers commands with the real dispatcher, streams the script."""

    def __init__(self, script=(), serial="WREN-0001"):
        self.facade = fake_facade.FakeFacade()
        self.dev = scpi.Dispatcher(self.facade, C.ident(serial, "0.1.0"))
        self.script = list(script)
        self.out = b""
        self.sent = []
        self.closed = False
        self.hung = False

    @property
    def done(self):
        """True once the script is used up and every reply was read."""
        return not self.script and not self.out

    def write(self, data):
        if self.closed:
            raise OSError("port closed")
        self.sent.append(data)
        if self.hung:
            return len(data)  # a hung device: takes the bytes, never answers
        for reply in self.dev.feed(data):
            self.out += (reply + "\n").encode()
        return len(data)

    @property
    def in_waiting(self):
        return len(self.out)

    def read(self, n):
        if self.closed:
            raise OSError("port closed")
        if self.out:
            data, self.out = self.out[:n], self.out[n:]
            return data
        if not self.facade.streaming or not self.script:
            return b""
        item = self.script.pop(0)
        if isinstance(item, BaseException):
            raise item
        if callable(item):
            item()
            return b""
        if item is None:
            return b""
        return (item.encode() if isinstance(item, str) else item) + b"\n"

    def close(self):
        self.closed = True


class FakeTime:
    """A monotonic clock that moves by `step` at each call, and a `sleep` that moves it."""

    def __init__(self, step=0.001):
        self.t = 100.0
        self.step = step
        self.slept = []

    def __call__(self):
        self.t += self.step
        return self.t

    def sleep(self, s):
        self.slept.append(s)
        self.t += s
