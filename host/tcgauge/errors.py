"""The host's exception family: callers catch `TcgaugeError`."""


class TcgaugeError(Exception):
    """Base of every error the host tools raise on purpose.

    The CLI turns it into one line on stderr and exit status 2; anything
    else escaping a command is a bug and keeps its traceback.
    """
