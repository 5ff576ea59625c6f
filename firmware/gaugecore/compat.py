"""Shims that let the core run on both MicroPython and CPython."""

try:
    from micropython import const  # noqa: F401  (MicroPython)
except ImportError:  # CPython

    def const(x):
        """Return x: MicroPython folds `const()` at compile time."""
        return x
