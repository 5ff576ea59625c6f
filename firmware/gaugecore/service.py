"""The device's I/O loop: bytes in, replies and stream records out, never blocking.

The port is any object with two methods (the byte-stream interface):

    read_available() -> bytes     whatever has arrived, b"" when nothing
    write(data) -> int or None    bytes taken now (0 when the link is busy);
                                  None means all of them (MicroPython UART)

`Service(port, device)` makes the gaugecore.scpi Dispatcher for the
device facade and hooks the controller's `on_reading`. `poll()` reads the
port, answers complete lines and writes what the port will take;
`run(period_ms)` is the asyncio task that calls it. While streaming is on,
each new reading of each channel becomes one record (gaugecore.record).

Output goes through two bounded queues: replies (served first, so commands
are answered while streaming) and records. A record that finds its queue
full is dropped and counted in `dropped`; its sequence number is used all
the same, so the host sees the gap. Nothing waits for the port: the
control loop is never held up by a slow link. A line is always written
whole before the next one starts.
"""

try:
    import asyncio
except ImportError:  # older MicroPython ports
    import uasyncio as asyncio

from gaugecore import record
from gaugecore import states
from gaugecore.scpi import Dispatcher


class _Ring:
    """Fixed-capacity FIFO of byte strings (slots made once)."""

    def __init__(self, n):
        if n < 1:
            raise ValueError("queue length must be >= 1")
        self._slots = [None] * n
        self._head = 0
        self.count = 0

    def full(self):
        return self.count == len(self._slots)

    def push(self, item):
        n = len(self._slots)
        self._slots[(self._head + self.count) % n] = item
        self.count += 1

    def pop(self):
        item = self._slots[self._head]
        self._slots[self._head] = None
        self._head = (self._head + 1) % len(self._slots)
        self.count -= 1
        return item

    def clear(self):
        while self.count:
            self.pop()


async def _sleep_ms(ms):
    if hasattr(asyncio, "sleep_ms"):
        await asyncio.sleep_ms(ms)
    else:
        await asyncio.sleep(ms * 0.001)


class Service:
    """Protocol and streaming over one byte stream (see the module docstring)."""

    def __init__(self, port, device, records_queue=64, replies_queue=16, sleep_ms=None):
        self.port = port
        self.device = device
        self.dispatcher = Dispatcher(device, device.ident(), len(device.channels), device.n_setpoints())
        device.errors = self.dispatcher
        for note in device.notes:
            self.dispatcher.push_error(-200, note)
        device.notes = []
        self._records = _Ring(records_queue)
        self._replies = _Ring(replies_queue)
        self._cur = None  # memoryview of the line being written
        self._off = 0
        self._sleep_ms = sleep_ms or _sleep_ms
        self.seq = 0
        self.records = 0  # records queued
        self.dropped = 0  # records dropped: queue full
        self.replies_dropped = 0
        self.bytes_in = 0
        self.bytes_out = 0
        self.running = False
        device.controller.on_reading = self.on_reading

    # ---------------------------------------------------------------- readings
    def on_reading(self, ch):
        """Controller callback: device bookkeeping, then one record if streaming."""
        self.device.on_reading(ch)
        if not self.device.streaming:
            return
        seq = self.seq
        self.seq = (seq + 1) % record.SEQ_MOD
        if self._records.full():
            self.dropped += 1
            return
        if ch.state == states.FAULT:
            line = record.encode(seq, ch.time_ms, ch.index + 1, None, None, None, states.FAULT,
                                 ch.fault)
        else:
            line = record.encode(seq, ch.time_ms, ch.index + 1, ch.emf_mv, ch.cj_c, ch.pressure_pa,
                                 ch.state, None)
        self._records.push((line + "\n").encode())
        self.records += 1

    # ---------------------------------------------------------------- I/O
    def poll(self):
        """Read, answer, write; never blocks. True if anything moved."""
        moved = False
        data = self.port.read_available()
        if data:
            moved = True
            self.bytes_in += len(data)
            for reply in self.dispatcher.feed(data):
                if self._replies.full():
                    self.replies_dropped += 1
                else:
                    self._replies.push((reply + "\n").encode())
        if not self.device.streaming and self._records.count:
            self._records.clear()  # stream switched off: unsent records go
        return self._flush() or moved

    def _flush(self):
        moved = False
        while True:
            if self._cur is None:
                if self._replies.count:
                    self._cur = memoryview(self._replies.pop())
                elif self._records.count:
                    self._cur = memoryview(self._records.pop())
                else:
                    return moved
                self._off = 0
            rest = self._cur[self._off :] if self._off else self._cur
            n = self.port.write(rest)
            if n is None:
                n = len(rest)
            if n <= 0:
                return moved
            moved = True
            self.bytes_out += n
            self._off += n
            if self._off >= len(self._cur):
                self._cur = None

    def pending(self):
        """Lines waiting to be written (replies, records)."""
        return (self._replies.count, self._records.count)

    async def run(self, period_ms=5):
        """The service task: poll every period_ms until stop()."""
        self.running = True
        while self.running:
            self.poll()
            await self._sleep_ms(period_ms)

    def stop(self):
        """Make `run` return after its current cycle."""
        self.running = False
