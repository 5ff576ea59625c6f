"""ESP32 DevKit (ESP32-WROOM-32): pin map of the reference hardware.

SPI id 2 (VSPI pins) for the ADS1220, I2C id 0 on GPIO 21/22. DRDY on GPIO
34 (input only, the ADS1220 drives it). Strapping pins carry only the
on-board LED (GPIO 2) and the ADS1220's CS (GPIO 5, idle high). Relays sit on
pins that stay quiet during boot; GPIO 14, which may toggle at boot (from
memory), only drives the optional bridge enable, harmless while the sink's
set point is still 0.
"""

PINS = {
    "spi": 2, "sck": 18, "mosi": 23, "miso": 19, "cs": 5, "drdy": 34,
    "i2c": 0, "sda": 21, "scl": 22,
    "polarity": (32, 33),
    "enable": (14, 13),
    "pwm": (16, 17),
    "relays": ((25, 26), (27, 4)),
    "led": 2,
}


def build(config, clock=None):
    """Buses and drivers of this board (boards.common.build)."""
    import machine

    from boards import common

    return common.build(config, PINS, machine, clock)
