# MicroPython manifest: freezes the tcgauge firmware packages into a build.
#
#   make -C ports/rp2 BOARD=RPI_PICO FROZEN_MANIFEST=/path/to/firmware/manifest.py
#
# The build tools run this file with its own folder as the working directory
# and provide metadata(), package(), module() and include(). main.py, board.json
# and tables/ stay on the board's filesystem (copy them with mpremote), so a
# board can be reconfigured without rebuilding the firmware.
# FROZEN_MANIFEST replaces the port's manifest, so it is included first: it
# brings asyncio and the port's other frozen modules (rp2 and esp32 both have
# ports/<port>/boards/manifest.py).

_version = {}
with open("gaugecore/version.py") as _f:
    exec(_f.read(), _version)  # the one version number (gaugecore.version.VERSION)

include("$(PORT_DIR)/boards/manifest.py")
metadata(description="tcgauge: thermocouple vacuum gauge controller firmware", version=_version["VERSION"],
         license="MIT")
package("gaugecore")
package("drivers")
package("boards")
