"""The core in single precision, as a Pico or an ESP32 computes (tests/f32.py emulates it).

The other tiers compute in double (CPython, and the WebAssembly MicroPython
build), so they cannot show what 24-bit mantissas do to the readings. Here the
same gaugecore, every float rounded to IEEE 754 binary32, runs beside the
double-precision one on the same inputs and the same simulated bench.

Sources: IEEE 754-2008 binary32 (24-bit significand); NIST ITS-90 type K
(the `thermocouples` package, which tests/core/test_thermocouple.py checks
against NIST Monograph 175); issue 4's regulation goal (+/-500 ppm).
"""

import contextlib
import math
import os
import random

import pytest
import thermocouples
from f32 import r32, single_precision
from support import ROOT

from gaugecore import tablefile
from gaugecore import thermocouple as tc64
from tcgauge.sim import chamber
from tcgauge.sim.bench import Bench
from tcgauge.sim.rig import limits
from tcgauge.sim.simtable import make_table


TORR = 101325.0 / 760.0  # NIST SP 811 B.8
TEXT = tablefile.dumps(make_table("wren-demo", "N2", 64, 0.05, 500.0))
# a stored vacuum zero of the demo tube (invented values, as tests/upy uses)
ZERO = {"heater_ma": 165.3, "emf_mv": 12.32, "c_e_j_per_mv": 0.0569, "g_e_w_per_mv": 0.00239,
        "a2_w_per_mv2": 0.000104, "tau_s": 11.9}
STEPS_TORR = (1e-3, 3e-3, 1e-2, 3e-2, 0.1, 0.3, 1.0)
STEP_S = 90
TYPE_K = thermocouples.get_thermocouple("K")
# the regulation benchmark's bench (tools/bench/regulation.py): the precision sense
# resistor the design calls for (invented part values), ambient ramp, supply sag
PRECISION_SENSE = {"sense_tc_ppm_k": 5.0, "sense_tolerance": 0.0001}


def core(single):
    """Context: the single-precision core if `single`, else the usual one."""
    return single_precision() if single else contextlib.nullcontext()


def test_emulation_rounds_to_binary32():
    # IEEE 754 binary32: 0.1 is 13421773 x 2^-27; 2^24 + 1 needs 25 bits; 1e39 > max (3.4e38)
    assert r32(0.1) == 13421773 / 2.0 ** 27
    assert r32(2.0 ** 24 + 1.0) == 2.0 ** 24
    assert r32(1e39) == math.inf and r32(-1e39) == -math.inf
    assert r32(7) == 7 and type(r32(7)) is int  # integers stay exact
    # the firmware's own probe of its machine epsilon (gaugecore.thermocouple) sees 2^-23
    with single_precision():
        from gaugecore import thermocouple as tc32
    assert tc32._EPS == 2.0 ** -23
    assert tc64._EPS == 2.0 ** -52
    assert tc32 is not tc64


def test_type_k_in_single_precision_against_its90():
    with single_precision():
        from gaugecore import thermocouple as tc32
    worst_e = worst_t = 0.0
    for t in range(-270, 1373, 7):
        ref_mv = TYPE_K.temp_to_volt(float(t)) * 1e3  # the package works in volts
        e32 = tc32.emf_mv("K", r32(float(t)))
        worst_e = max(worst_e, abs(e32 - ref_mv))
        if t >= -200:  # the inverse is defined from -200 C (NIST Monograph 175)
            worst_t = max(worst_t, abs(tc32.temperature_c("K", r32(ref_mv)) - t))
    # within half a unit of NIST Monograph 175's tables (given to 1 uV); 5 mK is far below any
    # use of the filament temperature (the inverse stops once a Newton step is below
    # 1e4 x epsilon = 1.2 mK, gaugecore.thermocouple._STEP_TOL_C)
    assert worst_e < 5e-4, worst_e
    assert worst_t < 5e-3, worst_t


def test_table_conversion_in_single_precision():
    t64 = tablefile.loads(TEXT)
    with single_precision():
        from gaugecore import tablefile as tf32

        t32 = tf32.loads(TEXT)
    lo, hi = t64.emf_range_mv
    rng = random.Random(4)
    worst = 0.0
    for _ in range(3000):
        e = r32(lo + (hi - lo) * rng.random())  # the EMF as a board holds it
        p64, s64 = t64.convert(e)
        p32, s32 = t32.convert(e)
        assert s32 == s64
        worst = max(worst, abs(p32 / p64 - 1.0))
    # the table's own accuracy is 10 % of reading (tests/sim): single precision adds < 0.01 %
    assert worst < 1e-4, worst


def staircase(single):
    """Both channels (2: fast response) zeroed, 90 s at each pressure of STEPS_TORR.

    -> ({(channel, step): mean ln p over the last 20 s}, {same: std}, set of the states
    and set of the faults in those windows)."""
    with core(single):
        from gaugecore import tablefile as tf
        from gaugecore.channel import Channel
        from gaugecore.zero import ZeroResult

        table = tf.loads(TEXT)
        sc = chamber.Scenario("staircase", pressure_pa=STEPS_TORR[0] * TORR)
        for p in STEPS_TORR:
            sc.step(p * TORR, float(STEP_S))
        bench = Bench("wren-demo", scenario=sc, seed=0)
        chans = [Channel(i, c.tc, c.cj, c.heater, c.relays, table, limits()) for i, c in enumerate(bench.channels)]
        for c in chans:
            c.apply_zero(ZeroResult.from_dict(ZERO))
        chans[1].set_fast(True)
    logs = {}
    seen = set()
    faults = set()
    clock = bench.clock
    end = STEP_S * 1000 * len(STEPS_TORR)
    while clock.ticks_ms() < end:
        now = clock.ticks_ms()
        for c in chans:
            if c.step(now) and now % (STEP_S * 1000) > (STEP_S - 20) * 1000:
                seen.add(c.state)
                faults.add(c.fault)
                logs.setdefault((c.index, now // (STEP_S * 1000)), []).append(math.log(c.pressure_pa))
        nxt = min(c.next_ms for c in chans)
        if nxt > clock.ticks_ms():
            clock.sleep_ms(nxt - clock.ticks_ms())
    mean = {k: sum(v) / len(v) for k, v in logs.items()}
    std = {k: (sum((x - mean[k]) ** 2 for x in v) / len(v)) ** 0.5 for k, v in logs.items()}
    return mean, std, seen, faults


@pytest.fixture(scope="module")
def both():
    return staircase(False), staircase(True)


def test_controller_in_single_precision_reads_as_in_double(both):
    (m64, s64, _, _), (m32, s32, seen, faults) = both
    assert seen == {"ok"} and faults == {None}
    assert sorted(m32) == sorted(m64) and len(m32) == 2 * len(STEPS_TORR)
    for k in m64:
        # settled readings: the same to 0.1 % of reading, 1 mTorr to 1 Torr
        assert abs(m32[k] - m64[k]) < 1e-3, (k, m32[k] - m64[k])
        # noise: within 1.5 x of double's (the fast estimate differentiates; 24 bits still do)
        assert s32[k] < 1.5 * s64[k] + 1e-4, (k, s32[k], s64[k])


def peak_ppm(single, duration_s=100.0):
    """Peak |true current - 165 mA| in ppm from 10 s, as tools/bench/regulation.py measures it."""
    with core(single):
        from gaugecore.heater import HeaterRegulator
    sc = chamber.static(pressure_pa=1.0, gas="N2", ambient_c=22.0, name="regulation")
    sc.ambient_ramp(20.0, 60.0, 42.0)
    b = Bench("wren-demo", scenario=sc, seed=0, channels=1, heater=PRECISION_SENSE)
    b.inject("supply-sag", 0, at_s=40.0, supply_v=3.0)
    ch = b.channels[0]
    reg = HeaterRegulator(ch.heater, 165.0, 100.0, 220.0, compliance_v=0.98 * ch.heater.compliance_v())
    reg.start()
    worst = 0.0
    while b.clock.ticks_ms() < duration_s * 1000:
        b.clock.sleep_ms(20)  # gaugecore.channel.HEATER_TICK_MS
        t = b.clock.ticks_ms()
        reg.update(t)
        if t >= 10000:
            worst = max(worst, abs(abs(ch.true_current_ma()) - 165.0))  # signed with the polarity
    return worst / 165.0 * 1e6


def test_regulation_in_single_precision():
    single, double = peak_ppm(True), peak_ppm(False)
    assert single < 500.0, single  # issue 4: within +/-500 ppm under drift and sag
    # 24 bits resolve 165 mA to 0.06 ppm: the loop's own figure barely moves
    assert abs(single - double) < 10.0, (single, double)


def test_long_uptime_changes_nothing():
    """35 days of uptime (3e9 ms: beyond MicroPython's small ints, 2^30 on 32-bit ports,
    so the board's times become long integers, still exact) change no reading: only
    differences of times ever reach a float."""
    def run(offset):
        with single_precision():
            from gaugecore import tablefile as tf
            from gaugecore.channel import Channel

            table = tf.loads(TEXT)
            bench = Bench("wren-demo", scenario=chamber.static(0.5), seed=1, channels=1)
            c = bench.channels[0]
            ch = Channel(0, c.tc, c.cj, c.heater, c.relays, table, limits(), fast=True)
        out = []
        clock = bench.clock
        while clock.ticks_ms() < 60000:
            if ch.step(clock.ticks_ms() + offset):
                out.append((ch.seq, ch.pressure_pa, ch.state, ch.emf_mv, ch.heater_ma, ch.time_ms - offset))
            nxt = ch.next_ms - offset
            if nxt > clock.ticks_ms():
                clock.sleep_ms(nxt - clock.ticks_ms())
        return out

    a = run(0)
    b = run(3 * 10 ** 9)
    assert len(a) == 600 and a[-1][2] == "ok"
    assert a == b


def test_table_checksums_are_the_files_in_single_precision(tmp_path):
    """TABL:ACT? names the table a channel converts with by its file's CRC-32, the number the
    host computes (zlib, independent of gaugecore): never by re-writing 24-bit floats, whose
    '%.10g' text is not the file's (0.15 becomes 0.150000006)."""
    import shutil
    import zlib

    demo = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")
    with open(demo, "rb") as f:
        data = f.read()
    crc = zlib.crc32(data[:data.rfind(b'"crc32": "')])  # the file's own crc32 field covers this
    (tmp_path / "tables").mkdir()
    shutil.copy(demo, str(tmp_path / "tables" / "demo_n2.json"))
    lim = dict(limits())
    with single_precision():
        from gaugecore import scpi
        from gaugecore.assembly import build
        from gaugecore.catalogue import Catalogue
        from gaugecore.store import Store

        bench = Bench("wren-demo", seed=1, channels=2)
        dev = build(bench.channels, bench.clock, Catalogue(str(tmp_path / "tables")),
                    Store(str(tmp_path / "store")), [lim, dict(lim)], default_table="demo_n2")
        d = scpi.Dispatcher(dev, dev.ident(), 2, dev.n_setpoints())
        dev.errors = d
        from gaugecore import tablefile as tf32

        assert tf32.dumps(tf32.loads(data)) != data.decode()  # the hazard is real in single precision
    assert d.handle_line("TABL:CRC? 'demo_n2'") == '"0x%08x"' % crc
    assert d.handle_line("TABL:ACT?") == '"0x%08x","0x%08x"' % (crc, crc)
    assert d.handle_line("SYST:ERR?") == '0,"No error"'


def vacuum_zero(single):
    """The vacuum zero of one channel at the Larkspur base (static, 0.02 Pa): its result dict."""
    with core(single):
        from gaugecore import tablefile as tf
        from gaugecore.channel import Channel

        table = tf.loads(TEXT)
        bench = Bench("wren-demo", scenario=chamber.static(chamber.LARKSPUR.base_pressure_pa), seed=0,
                      channels=1)
        c = bench.channels[0]
        ch = Channel(0, c.tc, c.cj, c.heater, c.relays, table, limits())
    zero = []
    clock = bench.clock
    while clock.ticks_ms() < 600000:
        now = clock.ticks_ms()
        if now >= 120000 and not zero:
            zero.append(ch.start_zero(now))
        ch.step(now)
        if ch.next_ms > clock.ticks_ms():
            clock.sleep_ms(ch.next_ms - clock.ticks_ms())
    z = zero[0]
    assert z.state == "done", z.reason
    return z.result.to_dict()


def test_vacuum_zero_in_single_precision():
    single, double = vacuum_zero(True), vacuum_zero(False)
    # the current that gives the nominal EMF and the identified heat balance: the same to
    # 20 and 100 ppm (measured: 2 ppm); issue 4's regulation allows 500 ppm of current
    assert single["time_ms"] == double["time_ms"]
    assert single["heater_ma"] == pytest.approx(double["heater_ma"], rel=2e-5)
    assert single["emf_mv"] == pytest.approx(double["emf_mv"], rel=2e-5)
    for key in ("c_e_j_per_mv", "g_e_w_per_mv", "a2_w_per_mv2", "tau_s"):
        assert single[key] == pytest.approx(double[key], rel=1e-4), key


def fault_run(single, sim_fault):
    """(first fault time after the onset in ms, its name, state 3 s after the fault is gone)."""
    with core(single):
        from gaugecore import tablefile as tf
        from gaugecore.channel import Channel

        table = tf.loads(TEXT)
        bench = Bench("wren-demo", scenario=chamber.static(1.33), seed=0, channels=1)
        c = bench.channels[0]
        ch = Channel(0, c.tc, c.cj, c.heater, c.relays, table, limits())
    t_on, t_off = 30000, 33000
    bench.inject(sim_fault, 0, at_s=t_on / 1000.0, clear_at_s=t_off / 1000.0)
    first = None
    clock = bench.clock
    while clock.ticks_ms() < t_off + 3000:
        now = clock.ticks_ms()
        ch.step(now)
        if now < t_on:
            assert ch.state == "ok" or now < 10000, (now, ch.state, ch.fault)
        elif first is None and ch.state == "fault":
            first = (now - t_on, ch.fault)
        clock.sleep_ms(max(1, ch.next_ms - clock.ticks_ms()))
    return first[0], first[1], ch.state


@pytest.mark.parametrize("sim_fault", ["heater-open", "heater-short", "tc-open", "tc-short", "adc-fail",
                                       "adc-stuck", "cj-fail"])
def test_faults_in_single_precision(sim_fault):
    single, double = fault_run(True, sim_fault), fault_run(False, sim_fault)
    assert single == double  # the same fault, found at the same millisecond, the same recovery
    assert single[0] <= 1000  # issue 4: every fault within 1 s
