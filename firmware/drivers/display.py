"""Channel readings on a small text display (an SSD1306 with an 8x8 font).

`channel_text(index, pressure_pa, state, fault, unit)` is the pure part:

  "1: 2.3e-2 Torr ok"      a number with its state
  "1: <5.0e-4 Torr under"  below the table: the table's lowest pressure
  "1: >3.0e+0 Torr over"   above the table
  "2: ---- invalid"        no number (open, reversed or mis-wired TC; zeroing)
  "2: FAULT tc-open"       the fault's name; never a number

`wrap(text, width)` splits a line at spaces into pieces of at most `width`
characters (16 on a 128-pixel panel). `Display(panel)` draws channel 1, 2, ... (list order)
on its own pair of text rows and calls `show()`; a faulted channel's number
is never drawn, since `channel_text` has none to draw.
"""

from gaugecore import states, units

COLUMNS = 16  # 128 px / 8 px font
ROW_PX = 8


def sci(value):
    """`value` as mantissa with one decimal and a bare exponent: 2.3e-2, 1.0e+3."""
    if value != value or value in (1e300 * 1e300, -1e300 * 1e300):
        return "nan"
    if value == 0:
        return "0.0e+0"
    sign = "-" if value < 0 else ""
    v = -value if value < 0 else value
    exp = 0
    while v >= 10.0:
        v /= 10.0
        exp += 1
    while v < 1.0:
        v *= 10.0
        exp -= 1
    m = int(v * 10.0 + 0.5)  # mantissa in tenths, rounded half up
    if m >= 100:
        m //= 10
        exp += 1
    return "%s%d.%de%s%d" % (sign, m // 10, m % 10, "-" if exp < 0 else "+", -exp if exp < 0 else exp)


def channel_text(index, pressure_pa, state, fault=None, unit="TORR"):
    """One line for one channel (see the module docstring)."""
    if state == states.FAULT:
        return "%d: FAULT %s" % (index, fault or "unknown")
    if pressure_pa is None or state == states.INVALID:
        return "%d: ---- %s" % (index, state)
    mark = ""
    if state == states.UNDER:
        mark = "<"
    elif state == states.OVER:
        mark = ">"
    symbol = units.SYMBOL[unit.upper()] if unit.upper() in units.SYMBOL else unit
    return "%d: %s%s %s %s" % (index, mark, sci(units.from_pa(pressure_pa, unit)), symbol, state)


def wrap(text, width=COLUMNS):
    """Split `text` at spaces into lines of at most `width` characters."""
    out = []
    line = ""
    for word in text.split(" "):
        while len(word) > width:  # a word longer than a line is cut
            if line:
                out.append(line)
                line = ""
            out.append(word[:width])
            word = word[width:]
        if not line:
            line = word
        elif len(line) + 1 + len(word) <= width:
            line = line + " " + word
        else:
            out.append(line)
            line = word
    if line:
        out.append(line)
    return out


class Display:
    """Draws channel readings on `panel` (fill, text, show), two rows a channel."""

    def __init__(self, panel, unit="TORR", rows_per_channel=2):
        self.panel = panel
        self.unit = unit
        self.rows_per_channel = rows_per_channel
        self.lines = []  # the text last drawn, for tests and a status query

    def update(self, channels):
        """Draw every channel (objects with pressure_pa, state, fault); numbered from 1."""
        panel = self.panel
        panel.fill(0)
        drawn = []
        row = 0
        for n in range(len(channels)):
            ch = channels[n]
            text = channel_text(n + 1, ch.pressure_pa, ch.state, ch.fault, self.unit)
            pieces = wrap(text)[: self.rows_per_channel]
            for i in range(len(pieces)):
                panel.text(pieces[i], 0, (row + i) * ROW_PX, 1)
            drawn.append(text)
            row += self.rows_per_channel
        panel.show()
        self.lines = drawn
        return drawn
