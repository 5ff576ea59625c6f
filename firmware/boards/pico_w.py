"""Raspberry Pi Pico W: the Pico's pin map; the LED hangs on the wireless chip ("LED")."""

from boards.pico import PINS as _PICO

PINS = dict(_PICO)
PINS["led"] = "LED"  # MicroPython's name for the Pico W's LED (driven through the CYW43)


def build(config, clock=None):
    """Buses and drivers of this board (boards.common.build)."""
    import machine

    from boards import common

    return common.build(config, PINS, machine, clock)
