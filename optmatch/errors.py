"""Exception types shared by every layer (no dependencies)."""


class OptmatchError(Exception):
    """Base of every error the command line reports as a one-line message without a traceback."""
