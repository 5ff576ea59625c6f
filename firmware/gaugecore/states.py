"""Reading states: every pressure leaves the core together with one of these.

A number is only meaningful with its state: `UNDER` carries the table's
lowest pressure (print it as '< p_min'), `OVER` its highest ('> p_max'),
`INVALID` and `FAULT` carry no pressure at all (None).
"""

OK = "ok"  # inside the table's range
UNDER = "under"  # below the lowest tabulated pressure: reading is '< p_min'
OVER = "over"  # above the highest tabulated pressure: reading is '> p_max'
INVALID = "invalid"  # EMF impossible for this tube (open, reversed or mis-wired TC)
FAULT = "fault"  # the channel has a fault; the fault names the reason

ALL = (OK, UNDER, OVER, INVALID, FAULT)
