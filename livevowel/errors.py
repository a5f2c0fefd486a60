"""Errors meant for the person at the keyboard.

A :class:`UserError` carries a one-line message that says what went wrong and
what to do next. The command line prints it without a traceback and exits
with status 2 (bad input) or 1 (a failure of the run).
"""


class UserError(Exception):
    """A mistake the user can fix: bad file, bad option, missing device."""

    exit_code = 2


class RunFailure(UserError):
    """The run could not finish for a reason outside the user's input."""

    exit_code = 1
