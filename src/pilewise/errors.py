"""The one exception type for mistakes a user can fix."""

from __future__ import annotations


class PilewiseError(Exception):
    """A user error: bad option, missing input, nothing to cluster.

    The message is one line that says what is wrong and how to fix it. The CLI prints it
    without a traceback and exits with status 1; any other exception is a bug in pilewise.
    """
