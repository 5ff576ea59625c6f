"""A relay driven from one output pin (GPIO -> logic-level MOSFET -> coil).

De-energised is the safe state: the constructor releases the relay, and
`set(False)` always drives the pin to the level that releases it. The pin is
any object with `value(v)` (machine.Pin on the board). Relay contacts switch
only low-voltage signals to another controller's own interlock inputs; this
output is a process aid, never a safety interlock.
"""


class Relay:
    """One relay on `pin`; active_high False for a driver that energises on low."""

    def __init__(self, pin, active_high=True, name=""):
        self.pin = pin
        self.active_high = bool(active_high)
        self.name = name
        self.on = False
        self.switches = 0
        self.set(False)

    def set(self, on):
        """Energise (True) or release (False); remembers the state."""
        on = bool(on)
        self.pin.value(1 if on == self.active_high else 0)
        if on != self.on:
            self.switches += 1
        self.on = on

    def value(self):
        """True while energised."""
        return self.on
