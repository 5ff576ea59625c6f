"""The live view: exact plain lines, the sparkline, and the rich view at any width.

Readings are invented demo values (Wren tube, Larkspur bell jar). Unit
conversion: 1 Torr = 101325/760 Pa exactly (NIST SP 811, B.8), so
133.32 Pa = 1.00E+00 Torr and 13.332 Pa = 1.00E-01 Torr.
"""

import io
import re

from rich.cells import cell_len

from gaugecore.record import Record
from tcgauge.acquire import Event, Gap
from tcgauge.live import LiveView, format_pressure, sparkline


def feed(view, recs):
    view.on_start({"port": "scripted", "identity": "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0",
                   "host_version": "0", "host_s": 0.0})
    for rec in recs:
        view.on_record(rec, 0.0, None)


def test_format_pressure_never_a_number_for_fault_or_invalid():
    assert format_pressure(13.332, "ok", None, "TORR") == "1.00E-01"
    assert format_pressure(133.32, "over", None, "TORR") == ">1.00E+00"
    assert format_pressure(0.1, "under", None, "PA") == "<1.00E-01"
    assert format_pressure(None, "fault", "heater_open", "TORR") == "HEATER_OPEN"
    assert format_pressure(None, "invalid", None, "TORR") == "INVALID"
    # even if a number slipped through, a faulted channel shows its fault name
    assert format_pressure(5.0, "fault", "tc_open", "PA") == "TC_OPEN"


def test_plain_lines_exact():
    out = io.StringIO()
    view = LiveView(unit="TORR", out=out, plain=True, every_s=1.0)
    feed(view, [
        Record(1, 1000, 1, 7.25, 23.5, 13.332, "ok", None),
        Record(2, 1000, 2, 0.81, 23.5, 133.32, "over", None),
        Record(3, 1500, 1, 7.25, 23.5, 13.0, "ok", None),  # < 1 s after the last line: no line
        Record(4, 2000, 1, 7.25, 23.5, 12.0, "ok", None),
        Record(5, 2100, 2, None, 24.0, None, "fault", "heater_open"),  # state changed: a line
    ])
    view.on_event(Event("setpoint", 0.0, 2100, 1, 1, "on"))
    view.on_gap(Gap("sequence gap", 5, 9, 3, 0.0))
    feed_more = [Record(9, 3000, 1, 11.0, 23.5, 0.1333, "under", None),
                 Record(10, 3000, 2, None, 24.0, None, "invalid", None)]
    for rec in feed_more:
        view.on_record(rec, 0.0, None)
    assert out.getvalue().splitlines() == [
        "# connected to scripted: tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0",
        "t=1.000s ch=1 p=1.00E-01 unit=Torr state=ok fault=none sp=- records=1 gaps=0 corrupt=0 link=up",
        "t=1.000s ch=2 p=>1.00E+00 unit=Torr state=over fault=none sp=- records=2 gaps=0 corrupt=0 link=up",
        "t=2.000s ch=1 p=9.00E-02 unit=Torr state=ok fault=none sp=- records=4 gaps=0 corrupt=0 link=up",
        "t=2.100s ch=2 p=HEATER_OPEN unit=Torr state=fault fault=heater_open sp=- records=5 gaps=0 corrupt=0 link=up",
        "# event setpoint sp=1 on",
        "# sequence gap (3 record(s) missing)",
        "t=3.000s ch=1 p=<1.00E-03 unit=Torr state=under fault=none sp=1:on records=6 gaps=1 corrupt=0 link=up",
        "t=3.000s ch=2 p=INVALID unit=Torr state=invalid fault=none sp=1:on records=7 gaps=1 corrupt=0 link=up",
    ]


def test_plain_lines_parse_as_key_value():
    out = io.StringIO()
    view = LiveView(unit="PA", out=out, plain=True, every_s=0.0)
    feed(view, [Record(1, 250, 1, 7.25, 23.5, 13.332, "ok", None)])
    line = out.getvalue().splitlines()[-1]
    fields = dict(tok.split("=", 1) for tok in line.split(" "))
    assert fields["p"] == "1.33E+01" and fields["unit"] == "Pa" and fields["state"] == "ok"
    assert float(fields["p"]) == 13.3


def test_sparkline_levels_and_gaps():
    # p = 10^k for k = 0..7 over 8 s in 8 bins: one level per decade, lowest to highest
    samples = [(float(k), 10.0 ** k, "ok") for k in range(8)]
    assert sparkline(samples, 7.999, 8.0, 8) == "\u2581\u2582\u2583\u2584\u2585\u2586\u2587\u2588"
    samples = [(0.5, 1.0, "ok"), (2.5, None, "fault"), (3.5, 100.0, "ok")]
    assert sparkline(samples, 4.0, 4.0, 4, bars="abcdefgh") == "a !h"
    assert sparkline([], 10.0, 10.0, 5) == "     "


def test_rich_view_fits_narrow_and_wide_terminals():
    for width in (40, 80, 200):
        out = io.StringIO()
        view = LiveView(unit="TORR", out=out, plain=False, width=width)
        view.console = None
        from rich.console import Console
        view.console = Console(file=out, width=width, force_terminal=True, color_system=None)
        for rec in [Record(1, 1000, 1, 7.25, 23.5, 13.332, "ok", None),
                    Record(2, 1000, 2, None, 24.0, None, "fault", "heater_open")]:
            view.on_record(rec, 0.0, None)
        view.on_event(Event("setpoint", 0.0, 1000, 1, 1, "on"))
        view.console.print(view.render())
        text = out.getvalue()
        lines = text.splitlines()
        assert max(cell_len(ln) for ln in lines) <= width, (width, text)
        assert "HEATER_OPEN" in text and "1.00E-01 Torr" in text
        row2 = [ln for ln in lines if re.match(r"\s*2\s", ln)]
        assert row2 and not re.search(r"\d\.\d\dE", row2[0]), row2  # no number on the faulted channel
        assert "SETP1 (ch1) ON" in text.replace("\n", " ") or width < 60
        assert "not safety interlocks" in text.replace("\n", " ") or width < 60
