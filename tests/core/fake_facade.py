"""A scripted fake of the controller facade: records every call, returns set values.

Used by tests/core/test_scpi.py and tests/host/test_client.py. Values are
invented for the demo (the 'Wren' tube profile `wren-demo` on the
'Larkspur bell jar').
"""


class FakeFacade:
    """Implements every facade method of gaugecore.commands; `calls` logs them."""

    def __init__(self, channels=2, setpoints=2):
        self.calls = []
        self.fail = {}  # method name -> exception instance to raise
        self.readings = {ch: (13.332236842105264, "ok", None) for ch in range(1, channels + 1)}
        self.emf = {ch: 7.25 for ch in range(1, channels + 1)}  # invented
        self.junction = {ch: 23.5 for ch in range(1, channels + 1)}  # invented
        self.heater = {ch: 118.0 for ch in range(1, channels + 1)}  # invented
        self.tbl = {ch: "wren-demo" for ch in range(1, channels + 1)}
        self.heater_target = {ch: 120.0 for ch in range(1, channels + 1)}  # invented
        self.fast_on = {ch: False for ch in range(1, channels + 1)}
        self.zero_offset = {ch: 0.012 for ch in range(1, channels + 1)}  # invented
        self.faults = {ch: None for ch in range(1, channels + 1)}
        self.unit_name = "TORR"
        self.rate = 10.0
        self.streaming = False
        self.sp = {
            n: {"source": 1, "on": 1.0, "off": 2.0, "dir": "BELOW", "delay": 0.0, "enable": False,
                "relay": False}
            for n in range(1, setpoints + 1)
        }

    def _log(self, name, *args):
        self.calls.append((name,) + args)
        exc = self.fail.get(name)
        if exc is not None:
            raise exc

    # common
    def reset(self):
        self._log("reset")

    def self_test(self):
        self._log("self_test")
        return 0

    # measurement
    def pressure(self, ch):
        self._log("pressure", ch)
        return self.readings[ch]

    def emf_mv(self, ch):
        self._log("emf_mv", ch)
        return self.emf[ch]

    def junction_c(self, ch):
        self._log("junction_c", ch)
        return self.junction[ch]

    def heater_ma(self, ch):
        self._log("heater_ma", ch)
        return self.heater[ch]

    # configuration
    def table(self, ch):
        self._log("table", ch)
        return self.tbl[ch]

    def set_table(self, ch, name):
        self._log("set_table", ch, name)
        self.tbl[ch] = name

    def unit(self):
        return self.unit_name  # not logged: the dispatcher reads it to convert pressures

    def set_unit(self, unit):
        self._log("set_unit", unit)
        self.unit_name = unit

    def rate_hz(self):
        self._log("rate_hz")
        return self.rate

    def set_rate_hz(self, hz):
        self._log("set_rate_hz", hz)
        self.rate = hz

    def heater_target_ma(self, ch):
        self._log("heater_target_ma", ch)
        return self.heater_target[ch]

    def set_heater_target_ma(self, ch, ma):
        self._log("set_heater_target_ma", ch, ma)
        self.heater_target[ch] = ma

    def fast(self, ch):
        self._log("fast", ch)
        return self.fast_on[ch]

    def set_fast(self, ch, on):
        self._log("set_fast", ch, on)
        self.fast_on[ch] = on

    # setpoints
    def sp_source(self, n):
        self._log("sp_source", n)
        return self.sp[n]["source"]

    def set_sp_source(self, n, ch):
        self._log("set_sp_source", n, ch)
        self.sp[n]["source"] = ch

    def sp_on_pa(self, n):
        self._log("sp_on_pa", n)
        return self.sp[n]["on"]

    def set_sp_on_pa(self, n, pressure_pa):
        self._log("set_sp_on_pa", n, pressure_pa)
        self.sp[n]["on"] = pressure_pa

    def sp_off_pa(self, n):
        self._log("sp_off_pa", n)
        return self.sp[n]["off"]

    def set_sp_off_pa(self, n, pressure_pa):
        self._log("set_sp_off_pa", n, pressure_pa)
        self.sp[n]["off"] = pressure_pa

    def sp_direction(self, n):
        self._log("sp_direction", n)
        return self.sp[n]["dir"]

    def set_sp_direction(self, n, word):
        self._log("set_sp_direction", n, word)
        self.sp[n]["dir"] = word

    def sp_delay_s(self, n):
        self._log("sp_delay_s", n)
        return self.sp[n]["delay"]

    def set_sp_delay_s(self, n, delay_s):
        self._log("set_sp_delay_s", n, delay_s)
        self.sp[n]["delay"] = delay_s

    def sp_enable(self, n):
        self._log("sp_enable", n)
        return self.sp[n]["enable"]

    def set_sp_enable(self, n, on):
        self._log("set_sp_enable", n, on)
        self.sp[n]["enable"] = on

    def sp_relay(self, n):
        self._log("sp_relay", n)
        return self.sp[n]["relay"]

    # zero, faults, stream, tables
    def zero(self, ch):
        self._log("zero", ch)

    def zero_mv(self, ch):
        self._log("zero_mv", ch)
        return self.zero_offset[ch]

    def fault(self, ch):
        self._log("fault", ch)
        return self.faults[ch]

    def clear_fault(self, ch):
        self._log("clear_fault", ch)
        self.faults[ch] = None

    def stream(self):
        self._log("stream")
        return self.streaming

    def set_stream(self, on):
        self._log("set_stream", on)
        self.streaming = on

    def memory_free(self):
        self._log("memory_free")
        return 123456

    def tables(self):
        self._log("tables")
        return ["wren-demo", "wren-demo-ar"]

    # table transfer (gaugecore.tablexfer); CRC values invented for the demo
    def table_crc(self, name):
        self._log("table_crc", name)
        return "0x1a2b3c4d"

    def active_crc(self, ch):
        self._log("active_crc", ch)
        return "0x1a2b3c4d"

    def upload_begin(self, name, channel, nbytes, crc_text):
        self._log("upload_begin", name, channel, nbytes, crc_text)

    def upload_data(self, index, text, chunk_crc):
        self._log("upload_data", index, text, chunk_crc)

    def upload_next(self):
        self._log("upload_next")
        return 0

    def upload_end(self):
        self._log("upload_end")
        return "0x1a2b3c4d"

    def upload_abort(self):
        self._log("upload_abort")

    def table_chunk(self, name, index):
        self._log("table_chunk", name, index)
        return ("65535", "")
