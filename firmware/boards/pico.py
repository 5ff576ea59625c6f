"""Raspberry Pi Pico (RP2040): pin map of the reference hardware.

SPI0 for the ADS1220 (mode 1), I2C0 for the ADS1115, MCP4725s, TMP117 and
display. GP numbers; the LED is GP25. hardware/README.md leaves the GPIO
numbers to this file: wire by this map. Polarity pins: high = polarity +1.
"""

PINS = {
    "spi": 0, "sck": 18, "mosi": 19, "miso": 16, "cs": 17, "drdy": 20,
    "i2c": 0, "sda": 4, "scl": 5,
    "polarity": (14, 15),  # H-bridge direction, channel 1 and 2
    "enable": (21, 22),  # optional bridge enable (board.json bridge_enable)
    "pwm": (6, 7),  # filtered-PWM set point (board.json dac "pwm")
    "relays": ((10, 11), (12, 13)),  # two relays per channel
    "led": 25,
}


def build(config, clock=None):
    """Buses and drivers of this board (boards.common.build)."""
    import machine

    from boards import common

    return common.build(config, PINS, machine, clock)
