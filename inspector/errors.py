"""The one exception type the core raises for problems a user can fix."""

from __future__ import annotations


class HeadcountError(Exception):
    """A readable, one-line problem with a checkpoint, an input or an option.

    The CLI prints ``str(error)`` and exits non-zero; the window shows it in a
    message bar. Anything else escaping the core is a bug.
    """
