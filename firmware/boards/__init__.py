"""Board files: pins and buses of each supported board; `build(config)` makes the hardware."""
