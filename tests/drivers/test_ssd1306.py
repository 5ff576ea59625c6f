"""SSD1306 driver against a fake of the Solomon Systech SSD1306 datasheet (rev. 1.1).

Checked: 8.1.5.2 I2C control byte (00h commands, 40h data); Table 9-1
command set (argument counts, AEh/AFh display off/on, 20h 00h horizontal
addressing, 21h/22h column and page window, 8Dh 14h charge pump per the
appendix); 10.1.3 horizontal addressing and the page/bit layout of GDDRAM.
"""

import os
import sys
import types

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers.ssd1306 import SSD1306  # noqa: E402


def make():
    chip = fc.FakeSSD1306()
    bus = fc.FakeI2C()
    bus.attach(0x3C, chip)
    return SSD1306(bus), chip


def test_init_sequence():
    panel, chip = make()
    assert chip.commands[0] == 0xAE  # display off first
    assert chip.commands[-3:] == [0xAF, 0x21, 0x22]  # display on last, then show()'s window
    assert chip.on
    assert chip.settings[0x8D] == (0x14,)  # charge pump enabled
    assert chip.settings[0x20] == (0x00,)  # horizontal addressing
    assert chip.settings[0xA8] == (63,)  # multiplex ratio 64
    assert chip.settings[0xDA] == (0x12,)  # alternative COM pins for 64 rows
    assert 0xA1 in chip.commands and 0xC8 in chip.commands
    # the blank screen was sent: window 0..127 x pages 0..7, 1024 data bytes
    assert chip.settings[0x21] == (0, 127) and chip.settings[0x22] == (0, 7)
    assert chip.data_writes == 1
    assert all(b == 0 for page in chip.ram for b in page)


def test_pixel_lands_in_gddram():
    panel, chip = make()
    panel.pixel(5, 13, 1)  # page 1, bit 5 of column 5
    panel.pixel(127, 63, 1)  # page 7, bit 7, last column
    panel.show()
    assert chip.ram[1][5] == 1 << 5
    assert chip.ram[7][127] == 0x80
    assert chip.pixel(5, 13) == 1 and chip.pixel(5, 12) == 0
    panel.pixel(5, 13, 0)
    panel.show()
    assert chip.ram[1][5] == 0


def test_fill_and_show_walks_horizontally():
    panel, chip = make()
    for i in range(len(panel.buffer)):
        panel.buffer[i] = i & 0xFF
    panel.show()
    # horizontal addressing: byte k goes to page k // 128, column k % 128
    assert chip.ram[0][0] == 0 and chip.ram[0][127] == 127 and chip.ram[1][0] == 128 & 0xFF
    assert chip.ram[7][127] == 1023 & 0xFF
    panel.fill(1)
    panel.show()
    assert all(b == 0xFF for page in chip.ram for b in page)


def test_contrast_invert_power():
    panel, chip = make()
    panel.contrast(0x40)
    assert chip.settings[0x81] == (0x40,)
    panel.invert(True)
    assert chip.settings[0xA7] == 0xA7
    panel.poweroff()
    assert not chip.on
    panel.poweron()
    assert chip.on


def test_text_without_framebuf_is_oserror(monkeypatch):
    monkeypatch.setitem(sys.modules, "framebuf", None)  # import framebuf -> ImportError
    panel, chip = make()
    assert panel.fb is None
    with pytest.raises(OSError) as e:
        panel.text("1", 0, 0)
    assert str(e.value) == "SSD1306: text needs the framebuf module"


def test_text_goes_through_framebuf(monkeypatch):
    calls = []

    class FB:
        def __init__(self, buf, w, h, fmt):
            calls.append(("init", len(buf), w, h, fmt))

        def text(self, s, x, y, c):
            calls.append(("text", s, x, y, c))

    monkeypatch.setitem(sys.modules, "framebuf", types.SimpleNamespace(FrameBuffer=FB, MONO_VLSB=0))
    panel, chip = make()
    panel.text("1: ok", 0, 8)
    assert calls == [("init", 1024, 128, 64, 0), ("text", "1: ok", 0, 8, 1)]


def test_bad_geometry():
    with pytest.raises(ValueError) as e:
        SSD1306(fc.FakeI2C(), 128, 48)
    assert str(e.value) == "SSD1306 panel must be at most 128 wide and 32 or 64 high"
