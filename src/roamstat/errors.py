"""The one exception type meant for users.

Anything raised as :class:`RoamstatError` is printed by the command line as
``roamstat: error: <message>`` with exit status 2.  The message must name the
file, row or column at fault and say what to do about it.  Every other
exception is a bug (exit 1; ``--debug`` shows the traceback).
"""


class RoamstatError(Exception):
    """A problem with the user's input or options, explained in one line."""


class NothingKept(RoamstatError):
    """Every input row was rejected; ``rejected`` holds them with their reasons, for rejected.csv."""

    def __init__(self, message: str, rejected) -> None:
        super().__init__(message)
        self.rejected = rejected


class Stopped(BaseException):
    """SIGTERM (or another stop signal) arrived: unwind like Ctrl-C, so every clean-up runs."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum
