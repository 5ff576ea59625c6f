"""ADS1220 driver against a fake that decodes SBAS501's commands and registers.

Sources: TI SBAS501 (ADS1220 datasheet; section and table numbers from
memory, as hardware/README.md numbers them): 8.5.3 commands, 8.6.1 register
map, 8.5.2 / Table 16 output code, 8.3.13 temperature sensor, 8.3.10 burn-out current sources.
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers import ads1220  # noqa: E402
from drivers.ads1220 import ADS1220  # noqa: E402


def make(**kw):
    clock = fc.FakeClock()
    chip = fc.FakeADS1220(clock)
    spi = fc.FakeSPI()
    cs = fc.FakePin("CS", 1)
    spi.attach(cs, chip)
    adc = ADS1220(spi, cs, drdy=fc.DrdyPin(chip), sleep_ms=clock.sleep_ms, **kw)
    return adc, chip, clock, cs


def test_reset_then_registers_as_configured():
    adc, chip, clock, cs = make()
    # 8.5.3.2 RESET first, then one WREG of registers 0-3 (rr = 00, nn = 11)
    assert chip.log[:2] == ["RESET", "WREG 0 4"]
    # reg 0: MUX 0000 (AIN0-AIN1), GAIN 101 (32), PGA_BYPASS 0  (8.6.1.1)
    assert chip.regs[0] == 0b0000_1010
    # reg 1: DR 000 (20 SPS), MODE 00 normal, CM 0 single shot, TS 0, BCS 0  (8.6.1.2)
    assert chip.regs[1] == 0x00
    # reg 2: VREF 00 internal 2.048 V, 50/60 = 01 both rejected, PSW 0, IDAC off  (8.6.1.3)
    assert chip.regs[2] == 0b0001_0000
    assert chip.regs[3] == 0x00  # DRDYM 0: DRDY pin only (8.6.1.4)
    assert cs.value() == 1  # CS released between frames
    adc.verify()  # RREG read-back equals what was written
    assert chip.log[-1] == "RREG 0 4"


def test_verify_fails_when_chip_lost_its_registers():
    adc, chip, clock, cs = make()
    chip.regs = bytearray(4)  # e.g. a brown-out reset
    with pytest.raises(OSError, match=r"^ADS1220: register read-back differs \(wiring or SPI mode\?\)$"):
        adc.verify()


def test_lsb_size_table16():
    adc, chip, clock, cs = make()
    # Table 16: 1 LSB = (2 * Vref / gain) / 2^24 = 2 * 2.048 / 32 / 16777216 V
    assert adc.uv_per_code == pytest.approx(2 * 2.048 / 32 / 2 ** 24 * 1e6, rel=1e-15)
    assert adc.uv_per_code == pytest.approx(0.00762939453125, rel=1e-15)


@pytest.mark.parametrize("vin_mv", [10.0, -3.2, 0.5, 15.0, 63.9])
def test_read_uv_inverts_the_output_code_formula(vin_mv):
    adc, chip, clock, cs = make()
    chip.vin[ads1220.MUX_AIN0_AIN1] = vin_mv * 1e-3
    uv = adc.read_uv(ads1220.MUX_AIN0_AIN1)
    # one code of quantisation: 7.6 nV at gain 32 (Table 16)
    assert uv == pytest.approx(vin_mv * 1000.0, abs=adc.uv_per_code)


def test_exact_code_for_10_mv():
    adc, chip, clock, cs = make()
    chip.vin[0] = 0.010
    # 10 mV * 32 / 2.048 V * 2^23 = 1310720 codes exactly (Table 16 formula)
    assert adc.read_code() == 1310720
    assert adc.read_uv(0) == 10000.0


def test_full_scale_clips_table16():
    adc, chip, clock, cs = make()
    chip.vin[0] = 0.100  # above +FS = 2.048 / 32 = 64 mV
    assert adc.read_code() == 0x7FFFFF  # Table 16: +FS -> 7FFFFFh
    assert adc.saturated(0x7FFFFF)
    chip.vin[0] = -0.100
    assert adc.read_code() == -0x800000  # Table 16: -FS -> 800000h
    assert not adc.saturated(1310720)


def test_mux_written_only_when_it_changes():
    adc, chip, clock, cs = make()
    chip.vin[ads1220.MUX_AIN2_AIN3] = 0.002
    n0 = len([x for x in chip.log if x.startswith("WREG")])
    adc.read_uv(ads1220.MUX_AIN2_AIN3)
    adc.read_uv(ads1220.MUX_AIN2_AIN3)
    wregs = [x for x in chip.log if x.startswith("WREG")]
    assert len(wregs) - n0 == 1
    assert wregs[-1] == "WREG 0 1"  # rr = 00, one register
    assert chip.regs[0] >> 4 == 0b0101  # Table 19: AINP = AIN2, AINN = AIN3
    assert chip.regs[0] & 0x0F == 0b1010  # gain bits kept


def test_single_shot_waits_for_drdy():
    adc, chip, clock, cs = make()
    t0 = clock.us
    adc.read_code()
    # a 20 SPS conversion takes one data period, 50 ms (fake's model; 8.3.6 from memory)
    assert 50000 <= clock.us - t0 <= 51000
    assert chip.log[-2:] == ["START", "RDATA"]


def test_no_drdy_times_out_with_our_message():
    clock = fc.FakeClock()
    chip = fc.FakeADS1220(clock)
    spi = fc.FakeSPI()
    cs = fc.FakePin("CS", 1)
    spi.attach(cs, chip)
    stuck = fc.FakePin("DRDY", 1)  # never falls: converter dead or unwired
    adc = ADS1220(spi, cs, drdy=stuck, sleep_ms=clock.sleep_ms, timeout_ms=120)
    with pytest.raises(OSError, match=r"^ADS1220: no data ready after 120 ms$"):
        adc.read_code()


def test_without_drdy_pin_waits_nominal_time():
    clock = fc.FakeClock()
    chip = fc.FakeADS1220(clock)
    spi = fc.FakeSPI()
    cs = fc.FakePin("CS", 1)
    spi.attach(cs, chip)
    adc = ADS1220(spi, cs, drdy=None, sleep_ms=clock.sleep_ms)
    chip.vin[0] = 0.004
    t0 = clock.us
    code = adc.read_code()
    chip.poll()
    assert clock.us - t0 == 52000  # 1000 // 20 + 2 ms
    assert code == int(round(0.004 * 32 / 2.048 * 2 ** 23))


# 8.3.13: 14-bit left-justified result, 0.03125 C per LSB. The codes below are
# the rows of its Table 12 as recalled (from memory); each equals t / 0.03125
# in 14-bit two's complement, so the arithmetic checks them.
@pytest.mark.parametrize("t_c, code14", [
    (25.0, 0x0320),  # 8.3.13 Table 12: 25 C = 00 0011 0010 0000
    (128.0, 0x1000),  # Table 12: 128 C = 01 0000 0000 0000
    (-25.0, 0x3CE0),  # Table 12: -25 C = 11 1100 1110 0000
    (0.25, 0x0008),  # Table 12: 0.25 C = 00 0000 0000 1000
])
def test_internal_temperature_sensor(t_c, code14):
    adc, chip, clock, cs = make()
    chip.temp_c = t_c
    assert adc.temperature_c() == t_c
    # TS bit set for that conversion (reg 1 bit 1) and cleared afterwards
    assert chip.conversions[-1][1] & 0x02
    assert chip.regs[1] & 0x02 == 0
    assert (chip.data >> 10) & 0x3FFF == code14


def test_burnout_sources_bit():
    adc, chip, clock, cs = make()
    adc.set_burnout(True)
    assert chip.regs[1] & 0x01  # reg 1 BCS (8.6.1.2)
    adc.set_burnout(False)
    assert chip.regs[1] & 0x01 == 0


@pytest.mark.parametrize("kw, msg", [
    (dict(gain=3), "ADS1220 gain must be one of 1, 2, 4, 8, 16, 32, 64, 128"),
    (dict(rate_sps=50), "ADS1220 rate must be one of 20, 45, 90, 175, 330, 600, 1000 SPS"),
    # 8.3.6: the 50/60 Hz filter works only at 20 SPS
    (dict(rate_sps=45), "ADS1220 50/60 Hz rejection needs 20 SPS"),
])
def test_invalid_settings(kw, msg):
    with pytest.raises(ValueError) as e:
        make(**kw)
    assert str(e.value) == msg


def test_other_gain_and_rate():
    adc, chip, clock, cs = make(gain=128, rate_sps=90, reject_50_60=False)
    assert (chip.regs[0] >> 1) & 7 == 0b111  # GAIN 111 = 128
    assert chip.regs[1] >> 5 == 0b010  # DR 010 = 90 SPS normal mode
    assert chip.regs[2] == 0x00
    chip.vin[0] = 0.001
    assert adc.read_uv(0) == pytest.approx(1000.0, abs=2 * 2.048 / 128 / 2 ** 24 * 1e6)
