"""Solomon Systech SSD1306: 128x64 monochrome OLED controller on I2C (0x3C).

A small driver of our own (micropython-lib has a larger one). References are
to the SSD1306 datasheet (Solomon Systech, rev. 1.1): I2C control byte
(8.1.5.2: 0x00 commands follow, 0x40 display data follows), command table
(section 9, Table 9-1) and the charge-pump application note in its appendix
(0x8D 0x14 before display on). Graphic RAM: 8 pages of 8 rows; each data
byte is one column of a page, bit 0 at the top (10.1.3: horizontal
addressing mode walks the columns, then the next page), which is
framebuf's MONO_VLSB layout.

Drawing goes through MicroPython's `framebuf` (its 8x8 font) when it exists;
`show()` sends the whole buffer with one `writevto` and allocates nothing.
"""

from gaugecore.compat import const

_SET_CONTRAST = const(0x81)
_DISPLAY_RAM = const(0xA4)  # A4: follow RAM content (A5: all on)
_NORMAL = const(0xA6)  # A6 normal, A7 inverse
_DISPLAY_OFF = const(0xAE)
_DISPLAY_ON = const(0xAF)
_MEMORY_MODE = const(0x20)  # then 0x00: horizontal addressing
_COLUMN_ADDR = const(0x21)
_PAGE_ADDR = const(0x22)
_START_LINE = const(0x40)
_SEG_REMAP = const(0xA1)  # column 127 mapped to SEG0
_MUX_RATIO = const(0xA8)
_COM_SCAN_DEC = const(0xC8)
_DISPLAY_OFFSET = const(0xD3)
_COM_PINS = const(0xDA)
_CLOCK_DIV = const(0xD5)
_PRECHARGE = const(0xD9)
_VCOMH = const(0xDB)
_CHARGE_PUMP = const(0x8D)

_INIT = (
    _DISPLAY_OFF,
    _CLOCK_DIV, 0x80,  # reset value: divide ratio 1, oscillator mid
    _MUX_RATIO, 0x3F,  # 64 rows (replaced by height - 1)
    _DISPLAY_OFFSET, 0x00,
    _START_LINE | 0x00,
    _CHARGE_PUMP, 0x14,  # internal charge pump on (appendix: charge pump setting)
    _MEMORY_MODE, 0x00,  # horizontal addressing mode
    _SEG_REMAP,
    _COM_SCAN_DEC,
    _COM_PINS, 0x12,  # alternative COM pin configuration (128x64 panels)
    _SET_CONTRAST, 0xCF,
    _PRECHARGE, 0xF1,
    _VCOMH, 0x40,
    _DISPLAY_RAM,
    _NORMAL,
    _DISPLAY_ON,
)


class SSD1306:
    """An SSD1306 panel on an existing I2C bus; `buffer` is its graphic RAM image."""

    def __init__(self, i2c, width=128, height=64, address=0x3C):
        if width > 128 or height not in (32, 64):
            raise ValueError("SSD1306 panel must be at most 128 wide and 32 or 64 high")
        self.i2c = i2c
        self.address = address
        self.width = width
        self.height = height
        self.pages = height // 8
        self.buffer = bytearray(width * self.pages)
        self._cmd = bytearray(2)  # control byte 0x00, command
        self._cmd[0] = 0x00
        self._data = b"\x40"  # control byte: display data follows
        self._vec = [self._data, self.buffer]
        try:
            import framebuf

            self.fb = framebuf.FrameBuffer(self.buffer, width, height, framebuf.MONO_VLSB)
        except ImportError:  # CPython without a framebuf: raw buffer access only
            self.fb = None
        self.init_display()

    def command(self, byte):
        """Send one command byte (control byte 0x00)."""
        self._cmd[1] = byte
        self.i2c.writeto(self.address, self._cmd)

    def init_display(self):
        """The power-on sequence, then a blank screen."""
        for byte in _INIT:
            if byte == 0x3F and self.height != 64:
                byte = self.height - 1
            if byte == 0x12 and self.height != 64:
                byte = 0x02  # sequential COM pins for 32-row panels
            self.command(byte)
        self.fill(0)
        self.show()

    def poweroff(self):
        """Display off (sleep)."""
        self.command(_DISPLAY_OFF)

    def poweron(self):
        """Display on."""
        self.command(_DISPLAY_ON)

    def contrast(self, level):
        """Contrast 0..255 (command 0x81)."""
        self.command(_SET_CONTRAST)
        self.command(level & 0xFF)

    def invert(self, on):
        """Inverse (0xA7) or normal (0xA6) display."""
        self.command(_NORMAL | (1 if on else 0))

    def fill(self, color):
        """Every pixel on (1) or off (0)."""
        value = 0xFF if color else 0x00
        b = self.buffer
        for i in range(len(b)):
            b[i] = value

    def pixel(self, x, y, color):
        """Set pixel (x, y): page y // 8, bit y % 8 of column x."""
        i = (y >> 3) * self.width + x
        if color:
            self.buffer[i] |= 1 << (y & 7)
        else:
            self.buffer[i] &= ~(1 << (y & 7)) & 0xFF

    def text(self, s, x, y, color=1):
        """Draw `s` with framebuf's 8x8 font (OSError without framebuf)."""
        if self.fb is None:
            raise OSError("SSD1306: text needs the framebuf module")
        self.fb.text(s, x, y, color)

    def show(self):
        """Send the whole buffer: column and page window, then the data."""
        self.command(_COLUMN_ADDR)
        self.command(0)
        self.command(self.width - 1)
        self.command(_PAGE_ADDR)
        self.command(0)
        self.command(self.pages - 1)
        self.i2c.writevto(self.address, self._vec)
