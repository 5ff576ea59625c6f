"""pyserial URL handlers of tcgauge: `sim://` opens a virtual device in-process.

Importing this package adds it to `serial.protocol_handler_packages`, so
`serial.serial_for_url("sim://?scenario=pumpdown&speed=10&seed=1")` works;
tcgauge.link imports it, so every host tool accepts a sim:// port.
"""

import serial

if __name__ not in serial.protocol_handler_packages:
    serial.protocol_handler_packages.append(__name__)
