"""Cold-junction sensors as the core's `read_c()`.

- `Tmp117Junction(tmp117)`: a TMP117 on the tube connector block, thermally
  tied to the thermocouple pins (+/-0.1 C, SNOS758 Table 6.5).
- `AdcJunction(ads1220)`: the ADS1220's internal sensor (SBAS501 8.3.13,
  +/-0.5 C typical), usable when the converter sits at the tube connector.

`offset_c` is a calibration offset subtracted from the sensor's reading.
Both raise OSError when the sensor fails, as the core expects.
"""


class Tmp117Junction:
    """Cold junction from a TMP117."""

    def __init__(self, sensor, offset_c=0.0):
        self.sensor = sensor
        self.offset_c = offset_c

    def read_c(self):
        """Junction temperature in deg C."""
        return self.sensor.temperature() - self.offset_c


class AdcJunction:
    """Cold junction from the ADS1220's internal temperature sensor."""

    def __init__(self, adc, offset_c=0.0):
        self.adc = adc
        self.offset_c = offset_c

    def read_c(self):
        """Junction temperature in deg C (one 50 ms conversion at 20 SPS)."""
        return self.adc.temperature_c() - self.offset_c
